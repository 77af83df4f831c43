// Command stickslip simulates, calibrates and replays rigid-body contact.
package main

func main() {}
