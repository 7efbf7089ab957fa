package pages

import (
	"syscall"
	"unsafe"
)

// madvPopulateWrite is Linux's MADV_POPULATE_WRITE (since 5.14): map the pages of a range
// writable, as a write to each would, in one call.
const madvPopulateWrite = 23

// populate asks the kernel to map the whole pages inside [p, p+n) in one call, which on the
// machines phipsi runs on costs about half of what faulting them one write at a time does
// (measured, 512 MiB: 0.31 → 0.61 GB/s on one core, 0.60 → 1.1 GB/s on two, first write
// included). Kernels without the advice refuse it and the writes map the pages as before.
func populate(p unsafe.Pointer, n int) {
	start := (uintptr(p) + pageSize - 1) &^ (pageSize - 1)
	end := (uintptr(p) + uintptr(n)) &^ (pageSize - 1)
	if end <= start {
		return
	}
	syscall.Syscall(syscall.SYS_MADVISE, start, end-start, madvPopulateWrite)
}
