// Command gonio is the client of goniod: submit scans, follow them live, fetch their points as CSV or JSON,
// steer the queue and the instrument. See `gonio help` and the README.
package main

import (
	"os"
)

func main() {
	os.Exit(execute(os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}
