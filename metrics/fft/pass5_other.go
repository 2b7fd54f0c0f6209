//go:build !amd64 || purego

package fft

func radix5(in, out []complex128, st *stage) { pass5(in, out, st) }

func prepareStage(*stage) {}
