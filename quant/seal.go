package quant

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
)

// Kinds of the generated C headers a scheme lists in c_headers.
const (
	// HeaderNetwork is the network's header, as [CHeader] writes it.
	HeaderNetwork = "network"
	// HeaderFrontEnd is the C front end's generated header.
	HeaderFrontEnd = "front_end"
)

// HeaderRef names one generated C header of an export: its file name
// beside the scheme, the prefix of its identifiers and its kind
// ([HeaderNetwork] or [HeaderFrontEnd]). Every listed header records the
// export's seal as the macro PREFIX_SEAL (network) or PREFIX_FE_SEAL
// (front end).
type HeaderRef struct {
	File   string `json:"file"`
	Prefix string `json:"prefix"`
	Kind   string `json:"kind"`
}

func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// sealMember is the top-level scheme member holding the seal; it is left
// out of the content the seal covers.
const sealMember = "seal"

// canonicalScheme returns the content a scheme's seal covers: the JSON
// document with its top-level "seal" member left out, every object's
// members sorted by name (byte order of their UTF-8), no whitespace
// between tokens, numbers exactly as written and strings as Go's
// encoding/json writes them with HTML escaping off. Layout (indentation,
// member order) therefore does not change it; any value does.
func canonicalScheme(b []byte) ([]byte, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var v any
	if err := dec.Decode(&v); err != nil {
		return nil, err
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("data after the JSON document")
	}
	top, ok := v.(map[string]any)
	if !ok {
		return nil, fmt.Errorf("not a JSON object")
	}
	delete(top, sealMember)
	var out bytes.Buffer
	enc := json.NewEncoder(&out)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(top); err != nil { // maps are written with sorted keys
		return nil, err
	}
	return bytes.TrimSuffix(out.Bytes(), []byte("\n")), nil
}

// SchemeDigest returns the SHA-256, as 64 lower-case hex digits, of the
// canonical content of the scheme description scheme: what its "seal"
// member must hold. The canonical content is the document without its
// top-level "seal" member, members of every object sorted by name, no
// whitespace between tokens, numbers as written (docs/export-format.md).
// The seal detects edits and files of different exports; it is not a
// signature (anyone can compute it).
func SchemeDigest(scheme []byte) (string, error) {
	c, err := canonicalScheme(scheme)
	if err != nil {
		return "", fmt.Errorf("quant: scheme: %w", err)
	}
	return sha256Hex(c), nil
}

// Reseal sets d.Seal to the digest of d's content. [Export] returns a
// sealed doc and [SchemeDoc.MarshalScheme] reseals; call Reseal after
// changing d and before [CHeader], which records d.Seal.
func (d *SchemeDoc) Reseal() error {
	d.Seal = ""
	b, err := json.Marshal(d)
	if err != nil {
		return fmt.Errorf("quant: %w", err)
	}
	s, err := SchemeDigest(b)
	if err != nil {
		return err
	}
	d.Seal = s
	return nil
}

// short abbreviates a seal or hash for messages.
func short(h string) string {
	if len(h) > 12 {
		return h[:12] + "…"
	}
	return h
}

var sealMacro = regexp.MustCompile(`(?m)^#define \w+_SEAL "([0-9a-f]*)"`)

// HeaderSeal returns the seal a generated C header records (the value of
// its PREFIX_SEAL or PREFIX_FE_SEAL macro), or "" if it records none.
func HeaderSeal(header []byte) string {
	m := sealMacro.FindSubmatch(header)
	if m == nil {
		return ""
	}
	return string(m[1])
}

// CheckHeader checks that header, the contents of the file name listed in
// d as ref, belongs to the export d describes: it must record d's seal,
// and a network header must be byte for byte the header [CHeader] makes
// from blob and d.
func CheckHeader(name string, header []byte, ref HeaderRef, blob []byte, d *SchemeDoc) error {
	bad := func(format string, args ...any) error {
		return &FormatError{Name: name, Reason: fmt.Sprintf(format, args...)}
	}
	switch s := HeaderSeal(header); {
	case s == "":
		return bad("records no export seal (not a header of this pipit's exports); export the model again")
	case s != d.Seal:
		return bad("sealed %s, its scheme %s: the files come from another export", short(s), short(d.Seal))
	}
	if ref.Kind == HeaderNetwork && string(header) != CHeader(blob, d, ref.Prefix) {
		return bad("differs from the header its blob and scheme make: edited after export; export the model again")
	}
	return nil
}

// headerPath returns the path of a header listed in a scheme at
// schemePath, refusing names that are not plain file names.
func headerPath(schemePath string, ref HeaderRef) (string, error) {
	if ref.File == "" || ref.File != filepath.Base(ref.File) || strings.ContainsAny(ref.File, `/\`) || ref.File == "." || ref.File == ".." {
		return "", &FormatError{Name: schemePath, Reason: fmt.Sprintf("c_headers names %q, not a file name", ref.File)}
	}
	return filepath.Join(filepath.Dir(schemePath), ref.File), nil
}

// checkHeaderFiles checks every header d lists that exists beside the
// scheme; a listed header that is missing is not an error here.
func checkHeaderFiles(schemePath string, blob []byte, d *SchemeDoc) error {
	for _, ref := range d.Headers {
		p, err := headerPath(schemePath, ref)
		if err != nil {
			return err
		}
		h, err := os.ReadFile(p)
		if os.IsNotExist(err) {
			continue
		}
		if err != nil {
			return fmt.Errorf("quant: %w", err)
		}
		if err := CheckHeader(p, h, ref, blob, d); err != nil {
			return err
		}
	}
	return nil
}
