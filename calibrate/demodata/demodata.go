// Package demodata holds the demo's fit file and its invented logs of the
// pusher cell (see generate/main.go for how they were made).
package demodata

import (
	"embed"
	"io/fs"
	"os"
	"path/filepath"
)

//go:embed demo.yaml *.csv
var files embed.FS

// FitFile is the name of the demo's fit file.
const FitFile = "demo.yaml"

// FS returns the fit file and the logs.
func FS() fs.FS { return files }

// WriteTo copies the fit file and the logs into dir and returns the fit
// file's path there.
func WriteTo(dir string) (string, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", err
	}
	entries, err := files.ReadDir(".")
	if err != nil {
		return "", err
	}
	for _, e := range entries {
		data, err := files.ReadFile(e.Name())
		if err != nil {
			return "", err
		}
		if err := os.WriteFile(filepath.Join(dir, e.Name()), data, 0o644); err != nil {
			return "", err
		}
	}
	return filepath.Join(dir, FitFile), nil
}
