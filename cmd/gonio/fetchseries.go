package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"goniod/client"
)

// fetchSeriesSplit writes each scan of a series to its own file, dir/<scan ID>.<format>.
func (a *app) fetchSeriesSplit(c *client.Client, id string, f client.Format, dir string) error {
	s, err := c.Series(a.ctx, id)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	for _, sid := range s.ScanIDs {
		path := filepath.Join(dir, sid+"."+string(f))
		var n int
		err := writeFileAtomic(path, func(w io.Writer) error {
			var err error
			n, err = c.Fetch(a.ctx, sid, f, w)
			return err
		})
		if err != nil {
			return fmt.Errorf("scan %s of series %s: %w", sid, id, err)
		}
		fmt.Fprintf(a.stderr, "%d points written to %s\n", n, path)
	}
	return nil
}
