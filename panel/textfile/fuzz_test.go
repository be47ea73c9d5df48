package textfile

import (
	"bytes"
	"errors"
	"io"
	"testing"
)

// FuzzDecode checks that Decode and Reader agree on every input: the same
// error, or the same text, which is the input less at most a leading
// UTF-8 byte-order mark.
func FuzzDecode(f *testing.F) {
	for _, s := range []string{"", "a", "\xEF\xBB\xBF# c\n", "\xFF\xFEa\x00", "\xFE\xFF\x00a", "\x00a", "a\x00", "\xEF\xBB"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		d, errD := Decode(data)
		r, errR := Reader(bytes.NewReader(data))
		if (errD == nil) != (errR == nil) || errD != nil && !errors.Is(errD, ErrUTF16) {
			t.Fatalf("Decode error %v, Reader error %v", errD, errR)
		}
		if errD != nil {
			return
		}
		b, _ := io.ReadAll(r)
		if !bytes.Equal(b, d) || !bytes.HasSuffix(data, d) || len(data)-len(d) != 0 && len(data)-len(d) != 3 {
			t.Fatalf("Decode %q, Reader %q of %q", d, b, data)
		}
	})
}
