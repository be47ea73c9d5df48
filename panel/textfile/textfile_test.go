package textfile

import (
	"errors"
	"io"
	"strings"
	"testing"
	"unicode/utf16"
)

// utf16LE and utf16BE encode s as UTF-16 with its byte-order mark, as the
// Unicode Standard 15.0, section 23.8, table 23-4 gives them (FF FE and
// FE FF; published).
func utf16LE(s string) string {
	b := []byte{0xFF, 0xFE}
	for _, u := range utf16.Encode([]rune(s)) {
		b = append(b, byte(u), byte(u>>8))
	}
	return string(b)
}

func utf16BE(s string, mark bool) string {
	var b []byte
	if mark {
		b = []byte{0xFE, 0xFF}
	}
	for _, u := range utf16.Encode([]rune(s)) {
		b = append(b, byte(u>>8), byte(u))
	}
	return string(b)
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
