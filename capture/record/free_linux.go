//go:build linux

package record

import (
	"fmt"
	"syscall"
)

// FreeBytes returns the space available to unprivileged users on the file
// system holding dir (statfs f_bavail × f_bsize).
func FreeBytes(dir string) (uint64, error) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err != nil {
		return 0, fmt.Errorf("record: free space of %s: %w", dir, err)
	}
	return st.Bavail * uint64(st.Bsize), nil
}
