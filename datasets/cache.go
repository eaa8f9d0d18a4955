package datasets

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"math"
	"os"
	"path/filepath"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
)

// Cache stores log-mel matrices of clips on disk, keyed by a SHA-256 of
// the file's bytes, the clip span, the padding and the front-end [features.Config],
// so a second run over the same corpus skips extraction, and any change of
// audio or settings misses. Entries are written atomically and carry a
// CRC-32; a damaged or truncated entry reads as a miss and is rewritten.
//
// Entry format (little-endian): magic "PIPITLM1", uint32 bands, uint32
// frames, bands·frames float32 (band-major), uint32 CRC-32 (IEEE) of all
// preceding bytes.
type Cache struct {
	Dir          string
	Hits, Misses int
}

const cacheMagic = "PIPITLM1"

func cacheKey(fileBytes []byte, cl Clip, pad string, minSamples int, fe features.Config) string {
	h := sha256.New()
	fh := sha256.Sum256(fileBytes)
	h.Write(fh[:])
	meta, _ := json.Marshal(struct {
		Start, End float64
		Pad        string
		Min        int
		FE         features.Config
	}{cl.Start, cl.End, pad, minSamples, fe})
	h.Write(meta)
	return hex.EncodeToString(h.Sum(nil))[:40]
}

func (c *Cache) path(key string) string { return filepath.Join(c.Dir, key[:2], key+".lmel") }

// get returns the cached matrix or ok=false.
func (c *Cache) get(key string) (m []float32, bands, frames int, ok bool) {
	if c == nil || c.Dir == "" {
		return nil, 0, 0, false
	}
	data, err := os.ReadFile(c.path(key))
	if err == nil {
		m, bands, frames, err = decodeCacheEntry(data)
	}
	if err != nil {
		c.Misses++
		return nil, 0, 0, false
	}
	c.Hits++
	return m, bands, frames, true
}

// decodeCacheEntry parses an entry, checking sizes before allocating.
func decodeCacheEntry(data []byte) ([]float32, int, int, error) {
	if len(data) < 20 || string(data[:8]) != cacheMagic {
		return nil, 0, 0, fmt.Errorf("datasets: not a cache entry")
	}
	bands := int(binary.LittleEndian.Uint32(data[8:]))
	frames := int(binary.LittleEndian.Uint32(data[12:]))
	if bands < 1 || frames < 1 || int64(bands)*int64(frames)*4+20 != int64(len(data)) {
		return nil, 0, 0, fmt.Errorf("datasets: cache entry size mismatch")
	}
	if crc32.ChecksumIEEE(data[:len(data)-4]) != binary.LittleEndian.Uint32(data[len(data)-4:]) {
		return nil, 0, 0, fmt.Errorf("datasets: cache entry CRC mismatch")
	}
	m := make([]float32, bands*frames)
	for i := range m {
		m[i] = math.Float32frombits(binary.LittleEndian.Uint32(data[16+4*i:]))
	}
	return m, bands, frames, nil
}

func (c *Cache) put(key string, m []float32, bands, frames int) error {
	if c == nil || c.Dir == "" {
		return nil
	}
	p := c.path(key)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		return fmt.Errorf("datasets: cache: %w", err)
	}
	b := make([]byte, 16+4*len(m)+4)
	copy(b, cacheMagic)
	binary.LittleEndian.PutUint32(b[8:], uint32(bands))
	binary.LittleEndian.PutUint32(b[12:], uint32(frames))
	for i, v := range m {
		binary.LittleEndian.PutUint32(b[16+4*i:], math.Float32bits(v))
	}
	binary.LittleEndian.PutUint32(b[len(b)-4:], crc32.ChecksumIEEE(b[:len(b)-4]))
	if err := fsutil.WriteFile(p, b); err != nil {
		return fmt.Errorf("datasets: cache: %w", err)
	}
	return nil
}
