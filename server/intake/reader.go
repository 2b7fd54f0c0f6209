package intake

import "bytes"

// bytesReader reads content held in memory.
func bytesReader(b []byte) *bytes.Reader { return bytes.NewReader(b) }

type nopCloser struct{ *bytes.Reader }

func (nopCloser) Close() error { return nil }
