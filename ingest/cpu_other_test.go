//go:build !unix

package ingest

// processCPUSeconds is not measured on this platform.
func processCPUSeconds() float64 { return 0 }
