package datasets

import (
	"crypto/rand"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
)

// Cache stores log-mel matrices of clips on disk, so a second run over the
// same corpus skips decoding and extraction, and any change of audio or
// settings misses.
//
// Entries are keyed by a SHA-256 of the file's bytes and the clip span,
// inside a group keyed by the front-end [features.Config], the padding, the
// window length and a version of [Load]'s rules for accepting clips:
// Dir/<group>/ holds pack files, each written once, atomically, by one
// [Load] with the entries it computed. A Load reads the packs of its group
// whole (a few sequential reads, not one file per clip), so a warm load
// costs reading the WAV files, hashing them and copying matrices. A damaged
// or truncated pack, or a damaged entry, reads as a miss and is recomputed;
// when a group holds more than [MaxCachePacks] packs, Load merges them into
// one.
//
// Pack format (little-endian): magic "PIPITLP1"; uint32 entry count n;
// uint32 0; n table rows of 52 bytes (key [32]byte, uint32 bands, uint32
// frames, uint64 data offset from the start of the file, uint32 CRC-32
// (IEEE) of the entry's data); uint32 CRC-32 of everything before it;
// then each entry's bands·frames float32 (band-major) at its offset,
// 4-byte aligned, inside the file.
//
// A Cache is not safe for concurrent use by several Loads at once; two
// processes sharing a directory at most recompute each other's entries.
type Cache struct {
	Dir          string
	Hits, Misses int
}

// MaxCachePacks is the number of pack files a cache group may hold before
// [Load] merges them.
const MaxCachePacks = 8

const (
	packMagic    = "PIPITLP1"
	packHeader   = 16
	packRow      = 52
	packExt      = ".lmpack"
	maxPackBytes = 1 << 34 // a pack larger than this is not read
)

// cacheKey is the key of one clip inside its group.
type cacheKey [32]byte

// fileKey returns the key of a clip: its file's bytes and its span.
func fileKey(fileBytes []byte, cl Clip) cacheKey {
	fh := sha256.Sum256(fileBytes)
	var b [32 + 16]byte
	copy(b[:], fh[:])
	binary.LittleEndian.PutUint64(b[32:], math.Float64bits(cl.Start))
	binary.LittleEndian.PutUint64(b[40:], math.Float64bits(cl.End))
	return sha256.Sum256(b[:])
}

// groupName names the group of a front end, a padding and a minimum clip
// length in samples (the window's, to which shorter clips are padded).
// Rule versions the loader's acceptance rules: since rule 1 a cache holds
// only clips of at least MinClipSamples, so a hit needs no length check,
// and older caches (which may hold padded short clips) miss.
func groupName(pad string, minSamples int, fe features.Config) string {
	meta, _ := json.Marshal(struct {
		Pad  string
		Min  int
		FE   features.Config
		Rule int
	}{pad, minSamples, fe, 1})
	h := sha256.Sum256(meta)
	return hex.EncodeToString(h[:10])
}

// cachedClip is one entry read from a pack.
type cachedClip struct {
	mat    []float32 // (bands, frames), shared: never modified
	frames int
}

// cacheGroup is the entries of one group found on disk, plus the number
// of pack files they came from.
type cacheGroup struct {
	dir     string
	entries map[cacheKey]cachedClip
	packs   []string
}

// openGroup reads every pack of a group. Packs that cannot be read or
// parsed are skipped (their entries miss); a missing directory is an
// empty group.
func (c *Cache) openGroup(name string) *cacheGroup {
	if c == nil || c.Dir == "" {
		return nil
	}
	g := &cacheGroup{dir: filepath.Join(c.Dir, name), entries: map[cacheKey]cachedClip{}}
	files, _ := filepath.Glob(filepath.Join(g.dir, "*"+packExt))
	sort.Strings(files)
	for _, f := range files {
		if fi, err := os.Stat(f); err != nil || fi.Size() > maxPackBytes {
			continue
		}
		data, err := os.ReadFile(f)
		if err != nil {
			continue
		}
		if err := decodePack(data, g.entries); err != nil {
			continue
		}
		g.packs = append(g.packs, f)
	}
	return g
}

// decodePack parses a pack and adds its sound entries to into (entries
// whose data fail their CRC are left out). It checks every size against
// len(data) before allocating, and returns an error when the header or the
// table is damaged.
func decodePack(data []byte, into map[cacheKey]cachedClip) error {
	le := binary.LittleEndian
	if len(data) < packHeader+4 || string(data[:8]) != packMagic {
		return errors.New("datasets: not a cache pack")
	}
	n := int64(le.Uint32(data[8:]))
	tableEnd := packHeader + n*packRow
	if tableEnd+4 > int64(len(data)) {
		return errors.New("datasets: cache pack table runs past the end")
	}
	if crc32.ChecksumIEEE(data[:tableEnd]) != le.Uint32(data[tableEnd:]) {
		return errors.New("datasets: cache pack table CRC mismatch")
	}
	// One allocation for all matrices; entries are views into it.
	var total int64
	for i := int64(0); i < n; i++ {
		row := data[packHeader+i*packRow:]
		total += int64(le.Uint32(row[32:])) * int64(le.Uint32(row[36:]))
		if total*4 > int64(len(data)) {
			return errors.New("datasets: cache pack entries larger than the file")
		}
	}
	all := make([]float32, total)
	for i := int64(0); i < n; i++ {
		row := data[packHeader+i*packRow:]
		var key cacheKey
		copy(key[:], row[:32])
		bands, frames := int64(le.Uint32(row[32:])), int64(le.Uint32(row[36:]))
		off, sum := le.Uint64(row[40:]), le.Uint32(row[48:])
		size := bands * frames * 4
		if bands < 1 || frames < 1 || off%4 != 0 || off < uint64(tableEnd+4) || off > uint64(len(data)) || uint64(size) > uint64(len(data))-off {
			continue
		}
		body := data[off : off+uint64(size)]
		if crc32.ChecksumIEEE(body) != sum {
			continue
		}
		m := all[: bands*frames : bands*frames]
		all = all[bands*frames:]
		for j := range m {
			m[j] = math.Float32frombits(le.Uint32(body[4*j:]))
		}
		into[key] = cachedClip{mat: m, frames: int(frames)}
	}
	return nil
}

// packEntry is one matrix to write into a pack.
type packEntry struct {
	key    cacheKey
	mat    []float32
	bands  int
	frames int
}

// encodePack writes entries in the pack format to w.
func encodePack(w io.Writer, entries []packEntry) error {
	le := binary.LittleEndian
	tableEnd := packHeader + len(entries)*packRow
	head := make([]byte, tableEnd+4)
	copy(head, packMagic)
	le.PutUint32(head[8:], uint32(len(entries)))
	off := uint64(tableEnd + 4)
	bodies := make([][]byte, len(entries))
	for i, e := range entries {
		b := make([]byte, 4*len(e.mat))
		for j, v := range e.mat {
			le.PutUint32(b[4*j:], math.Float32bits(v))
		}
		bodies[i] = b
		row := head[packHeader+i*packRow:]
		copy(row, e.key[:])
		le.PutUint32(row[32:], uint32(e.bands))
		le.PutUint32(row[36:], uint32(e.frames))
		le.PutUint64(row[40:], off)
		le.PutUint32(row[48:], crc32.ChecksumIEEE(b))
		off += uint64(len(b))
	}
	le.PutUint32(head[tableEnd:], crc32.ChecksumIEEE(head[:tableEnd]))
	if _, err := w.Write(head); err != nil {
		return err
	}
	for _, b := range bodies {
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	return nil
}

// add writes entries as one new pack of g, and merges the group's packs
// into one when there are more than MaxCachePacks.
func (g *cacheGroup) add(entries []packEntry) error {
	if g == nil || len(entries) == 0 {
		return nil
	}
	if err := os.MkdirAll(g.dir, 0o755); err != nil {
		return fmt.Errorf("datasets: cache: %w", err)
	}
	path, err := g.newPackPath()
	if err != nil {
		return err
	}
	if err := fsutil.WriteWith(path, func(w io.Writer) error { return encodePack(w, entries) }); err != nil {
		return fmt.Errorf("datasets: cache: %w", err)
	}
	for _, e := range entries {
		g.entries[e.key] = cachedClip{mat: e.mat, frames: e.frames}
	}
	g.packs = append(g.packs, path)
	if len(g.packs) <= MaxCachePacks {
		return nil
	}
	// Merge: one pack with every entry (in key order, so the file does
	// not depend on map order), then remove the others.
	all := make([]packEntry, 0, len(g.entries))
	for k, e := range g.entries {
		all = append(all, packEntry{key: k, mat: e.mat, bands: len(e.mat) / e.frames, frames: e.frames})
	}
	sort.Slice(all, func(i, j int) bool { return string(all[i].key[:]) < string(all[j].key[:]) })
	merged, err := g.newPackPath()
	if err != nil {
		return err
	}
	if err := fsutil.WriteWith(merged, func(w io.Writer) error { return encodePack(w, all) }); err != nil {
		return fmt.Errorf("datasets: cache: %w", err)
	}
	for _, p := range g.packs {
		if err := os.Remove(p); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("datasets: cache: %w", err)
		}
	}
	g.packs = []string{merged}
	return nil
}

// newPackPath returns an unused pack file name in g's directory.
func (g *cacheGroup) newPackPath() (string, error) {
	var b [8]byte
	if _, err := rand.Read(b[:]); err != nil {
		return "", fmt.Errorf("datasets: cache: %w", err)
	}
	return filepath.Join(g.dir, strings.ToLower(hex.EncodeToString(b[:]))+packExt), nil
}
