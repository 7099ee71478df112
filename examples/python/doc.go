// Package python holds the Python scripting example, voltage_series.py; its test runs the script against a
// daemon on the simulator and compares the CSV it writes with the daemon's stored points.
package python
