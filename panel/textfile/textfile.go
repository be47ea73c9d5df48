// Package textfile checks the text encoding of regdrift's input files (job
// TOML, targets, placement and residual CSV) before they are parsed.
//
// Every input is UTF-8. Spreadsheet programs and some Windows editors start
// a file with a byte-order mark (U+FEFF, the bytes EF BB BF in UTF-8), which
// carries no text: it is dropped here, so that a parser sees the first key
// or the first '#' of a comment line. A file saved as UTF-16 (with either
// byte order) is not read at all: each ASCII character would come with a
// NUL byte and the parser's message would be about a stray character, so
// it is named as what it is. The byte patterns are those of the Unicode
// Standard, version 15.0, section 23.8 "Specials", table 23-4 (byte-order
// mark signatures).
package textfile

import (
	"bufio"
	"bytes"
	"errors"
	"io"
	"unicode/utf16"
)

// ErrUTF16 is the error for an input saved as UTF-16.
var ErrUTF16 = errors.New("file is UTF-16; save it as UTF-8")

var bomUTF8 = []byte{0xEF, 0xBB, 0xBF}

// check reports the encoding problem of a file that starts with head (its
// first bytes, four or fewer at the end of a file): UTF-16 with a mark, or
// UTF-16 of ASCII text without one, whose first or second byte is NUL where
// the other is not (no UTF-8 text file starts with a NUL).
func check(head []byte) error {
	if len(head) >= 2 && (head[0] == 0xFE && head[1] == 0xFF || head[0] == 0xFF && head[1] == 0xFE) {
		return ErrUTF16
	}
	if len(head) >= 2 && (head[0] == 0) != (head[1] == 0) {
		return ErrUTF16
	}
	return nil
}

// Decode returns data without a leading UTF-8 byte-order mark, or ErrUTF16.
// The result shares data's memory.
func Decode(data []byte) ([]byte, error) {
	if err := check(data[:min(len(data), 4)]); err != nil {
		return nil, err
	}
	return bytes.TrimPrefix(data, bomUTF8), nil
}

// Reader returns a reader of r's text without a leading UTF-8 byte-order
// mark, or ErrUTF16. A read error of the first bytes is returned as is.
func Reader(r io.Reader) (io.Reader, error) {
	br := bufio.NewReader(r)
	head, err := br.Peek(4)
	if err != nil && err != io.EOF && !errors.Is(err, bufio.ErrBufferFull) {
		if len(head) == 0 {
			return nil, err
		}
	}
	if err := check(head); err != nil {
		return nil, err
	}
	if bytes.HasPrefix(head, bomUTF8) {
		br.Discard(len(bomUTF8))
	}
	return br, nil
}

// EncodeUTF16 writes s as UTF-16 with its byte-order mark (FF FE little
// endian, FE FF big endian): a file such as this package refuses, for the
// tests of the readers that use it.
func EncodeUTF16(s string, bigEndian bool) []byte {
	b := []byte{0xFF, 0xFE}
	if bigEndian {
		b = []byte{0xFE, 0xFF}
	}
	for _, u := range utf16.Encode([]rune(s)) {
		if bigEndian {
			b = append(b, byte(u>>8), byte(u))
		} else {
			b = append(b, byte(u), byte(u>>8))
		}
	}
	return b
}
