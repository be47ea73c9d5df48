package section

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// mountTmpfs mounts a tmpfs of size bytes at a new directory with the mount
// flags given and returns the directory; it skips the test where the process
// may not mount (not root, or a sandbox without CAP_SYS_ADMIN). Root ignores
// file permissions, so a read-only file system and a full one are the only
// way a test run as root sees the write faults a user's cache meets.
func mountTmpfs(t *testing.T, flags uintptr, size string) string {
	t.Helper()
	if os.Geteuid() != 0 {
		t.Skip("mounting a file system needs root")
	}
	dir := t.TempDir()
	if err := syscall.Mount("tmpfs", dir, "tmpfs", flags, "size="+size); err != nil {
		t.Skipf("cannot mount a tmpfs here: %v", err)
	}
	t.Cleanup(func() {
		if err := syscall.Unmount(dir, 0); err != nil {
			t.Errorf("unmount %s: %v", dir, err)
		}
	})
	return dir
}

// TestCacheWriteFaults: a read-only file system and a full disk make the
// cache write fail with the kernel's own errors (EROFS, ENOSPC); the solve
// still succeeds with the numbers of a fresh solve and a write warning, and
// no temporary file is left on the full disk.
func TestCacheWriteFaults(t *testing.T) {
	s, offs, set, fresh := faultSetup(t)
	cases := []struct {
		name  string
		dir   func(t *testing.T) string
		errno syscall.Errno
	}{
		{"read-only file system", func(t *testing.T) string {
			return mountTmpfs(t, syscall.MS_RDONLY, "64k")
		}, syscall.EROFS},
		{"full disk", func(t *testing.T) string {
			dir := mountTmpfs(t, 0, "16k")
			// Fill it: the tmpfs is page-granular, so write until the
			// kernel refuses.
			f, err := os.Create(filepath.Join(dir, "filler"))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			page := make([]byte, 4096)
			for {
				if _, err := f.Write(page); err != nil {
					if !errors.Is(err, syscall.ENOSPC) {
						t.Fatalf("filling the tmpfs: %v", err)
					}
					break
				}
			}
			return dir
		}, syscall.ENOSPC},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := c.dir(t)
			got, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
			if err != nil || hit {
				t.Fatalf("hit %v err %v", hit, err)
			}
			if !warned(got, "write") {
				t.Fatalf("no write warning: %v", got.CacheWarnings)
			}
			found := false
			for _, w := range got.CacheWarnings {
				found = found || errors.Is(w, c.errno)
			}
			if !found {
				t.Errorf("warnings %v do not carry %v", got.CacheWarnings, c.errno)
			}
			sameNumbers(t, c.name, got, fresh)
			ents, err := os.ReadDir(dir)
			if err != nil {
				t.Fatal(err)
			}
			for _, e := range ents {
				if e.Name() != "filler" {
					t.Errorf("left behind in the cache: %s", e.Name())
				}
			}
		})
	}
}
