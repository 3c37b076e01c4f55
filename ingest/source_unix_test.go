//go:build unix

package ingest

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// A named pipe (like the /dev/fd/N of a shell's <(zcat ...)) can be read once only: it is
// spooled, and the load is the same as from a file.
func TestLoad_NamedPipeIsSpooled(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "in.csv")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skipf("mkfifo: %v", err)
	}
	go func() {
		f, err := os.OpenFile(fifo, os.O_WRONLY, 0)
		if err != nil {
			return
		}
		f.WriteString("a,b\n1,x\n2,y\n")
		f.Close()
	}()
	res, err := loadInto(t, filepath.Join(dir, "t.db"), []Input{{Name: fifo}}, Options{Table: "t"})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 2 || res.Sources[0].Size != 12 || res.Columns[0].Type != TypeInteger {
		t.Errorf("result %+v %+v", res, res.Sources)
	}
}
