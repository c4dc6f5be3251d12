package client_test

import (
	"context"
	"fmt"
	"time"

	"strayleaf/client"
)

func ExampleDial() {
	// A client of a strayleafd on this machine, with a token of role place.
	c, err := client.Dial("127.0.0.1:7450", client.WithToken("slt_..."))
	if err != nil {
		fmt.Println(err)
		return
	}
	defer c.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	p, err := c.Place(ctx, "demo", "Ov-f3", []client.Reading{{Unit: "oil.14", Reading: "whone"}, {Unit: "oil.15", Reading: "tratrim"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(p.Model, p.BestGroup, p.Confidence)
}
