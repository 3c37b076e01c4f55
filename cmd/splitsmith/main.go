// Command splitsmith builds leak-free train/holdout splits in an SQLite file, audits them for
// leakage, and estimates how much data a target error needs. See README.md.
package main

import "os"

func main() { os.Exit(run(os.Args, os.Stdin, os.Stdout, os.Stderr)) }
