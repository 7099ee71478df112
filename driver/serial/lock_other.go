//go:build !unix

package serial

// lockPort does nothing here: Windows opens a serial port exclusively by itself.
func lockPort(string) (unlock func(), err error) { return func() {}, nil }
