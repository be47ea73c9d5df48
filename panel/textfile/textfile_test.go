package textfile

import (
	"errors"
	"io"
	"strings"
	"testing"
)

func utf16LE(s string) string { return string(EncodeUTF16(s, false)) }

// utf16BE is UTF-16BE, with or without the mark FE FF.
func utf16BE(s string, mark bool) string {
	b := EncodeUTF16(s, true)
	if !mark {
		b = b[2:]
	}
	return string(b)
}

// TestEncodeUTF16 checks the marks and byte order against the Unicode
// Standard 15.0, section 23.8, table 23-4 (FF FE little endian, FE FF big
// endian; published): "a" is U+0061.
func TestEncodeUTF16(t *testing.T) {
	if got := utf16LE("a"); got != "\xFF\xFEa\x00" {
		t.Errorf("little endian %q", got)
	}
	if got := utf16BE("a", true); got != "\xFE\xFF\x00a" {
		t.Errorf("big endian %q", got)
	}
}

func TestDecode(t *testing.T) {
	for _, tt := range []struct {
		name, in, want string
		err            error
	}{
		{"plain", "a = 1\n", "a = 1\n", nil},
		{"empty", "", "", nil},
		{"one byte", "a", "a", nil},
		{"utf-8 mark", "\xEF\xBB\xBF# c\na = 1\n", "# c\na = 1\n", nil},
		{"only a mark", "\xEF\xBB\xBF", "", nil},
		{"mark inside kept", "a\xEF\xBB\xBF", "a\xEF\xBB\xBF", nil},
		{"utf-16 le", utf16LE("a = 1\n"), "", ErrUTF16},
		{"utf-16 be", utf16BE("a = 1\n", true), "", ErrUTF16},
		{"utf-16 be without a mark", utf16BE("x,y\n", false), "", ErrUTF16},
	} {
		t.Run(tt.name, func(t *testing.T) {
			got, err := Decode([]byte(tt.in))
			if !errors.Is(err, tt.err) || err == nil && string(got) != tt.want {
				t.Errorf("Decode = %q, %v; want %q, %v", got, err, tt.want, tt.err)
			}
			r, err := Reader(strings.NewReader(tt.in))
			if !errors.Is(err, tt.err) {
				t.Fatalf("Reader: error %v, want %v", err, tt.err)
			}
			if err == nil {
				b, _ := io.ReadAll(r)
				if string(b) != tt.want {
					t.Errorf("Reader read %q, want %q", b, tt.want)
				}
			}
		})
	}
}
