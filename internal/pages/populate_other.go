//go:build !linux

package pages

import "unsafe"

// populate does nothing where the kernel has no advice to map a range at once.
func populate(unsafe.Pointer, int) {}
