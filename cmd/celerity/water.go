package main

import "celerity/speed/refspeed"

func waterSpeed(tC float64) (float64, error) { return refspeed.Water(tC) }
