package causal

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
)

// The columnar cache keeps a parsed CSV file as binary columns so that a
// notebook, whose every cell is a new process, parses a file once per kernel
// session (kernel.Load passes the session's folder). Layout:
//
//	magic (colMagic)
//	uint32 little-endian length of the header, header (JSON, colHeader)
//	every column's values: float64 (numeric) or int32 codes (categorical),
//	  little-endian, in header order
//	uint32 CRC-32C (Castagnoli) of everything before it
//
// The header names the source file by absolute path, size, modification
// time and a SHA-256 of its first and last 64 KiB; a cache is used only when
// all of them match the file as it is now, and only when the checksum of the
// cache itself is right. Anything else (a changed file, a damaged or
// foreign cache, another format version) parses the CSV again and rewrites
// the cache.
const colMagic = "counterpart columnar cache v1\n"

// colEdge is the length of the start and end of the source file hashed into
// the header.
const colEdge = 64 << 10

type colHeader struct {
	Source   string      `json:"source"`
	Size     int64       `json:"size"`
	ModNanos int64       `json:"mtime_ns"`
	Edges    string      `json:"edges_sha256"`
	Rows     int         `json:"rows"`
	Columns  []colSchema `json:"columns"`
}

type colSchema struct {
	Name    string   `json:"name"`
	Kind    Kind     `json:"kind"`
	Missing int      `json:"missing"`
	Issue   string   `json:"issue,omitempty"`
	TextAt  string   `json:"text_at,omitempty"`
	Levels  []string `json:"levels,omitempty"`
}

// sourceID identifies a file as it is now: absolute path, size,
// modification time and the hash of its edges.
func sourceID(path string) (colHeader, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return colHeader{}, err
	}
	f, err := os.Open(abs)
	if err != nil {
		return colHeader{}, err
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return colHeader{}, err
	}
	h := sha256.New()
	buf := make([]byte, colEdge)
	k, err := io.ReadFull(f, buf)
	if err != nil && err != io.ErrUnexpectedEOF && err != io.EOF {
		return colHeader{}, err
	}
	h.Write(buf[:k])
	if fi.Size() > colEdge {
		k, err = f.ReadAt(buf, max(colEdge, fi.Size()-colEdge))
		if err != nil && err != io.EOF {
			return colHeader{}, err
		}
		h.Write(buf[:k])
	}
	return colHeader{Source: abs, Size: fi.Size(), ModNanos: fi.ModTime().UnixNano(), Edges: hex.EncodeToString(h.Sum(nil))}, nil
}

func (h colHeader) sameSource(o colHeader) bool {
	return h.Source == o.Source && h.Size == o.Size && h.ModNanos == o.ModNanos && h.Edges == o.Edges
}

// cachePath is the cache file of source path abs in dir.
func cachePath(dir, abs string) string {
	sum := sha256.Sum256([]byte(abs))
	return filepath.Join(dir, "counterpart-"+hex.EncodeToString(sum[:8])+".columns")
}

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// crcWriter passes writes on and keeps their checksum.
type crcWriter struct {
	w   io.Writer
	crc uint32
}

func (c *crcWriter) Write(p []byte) (int, error) {
	c.crc = crc32.Update(c.crc, castagnoli, p)
	return c.w.Write(p)
}

// writeColumnCache writes f as the cache of the source id in dir: to a
// temporary file renamed into place, so a reader sees a whole cache or none.
// It returns the data fingerprint (see readColumnCache).
func writeColumnCache(dir string, id colHeader, f *Frame) (string, error) {
	id.Rows = f.rows
	for _, name := range f.names {
		c := f.cols[name]
		s := colSchema{Name: name, Kind: c.Kind, Missing: c.Missing, Levels: c.Levels, TextAt: c.textAt}
		if c.issue != nil {
			s.Issue = c.issue.Error()
		}
		id.Columns = append(id.Columns, s)
	}
	head, err := json.Marshal(id)
	if err != nil {
		return "", err
	}
	tmp, err := os.CreateTemp(dir, ".counterpart-*.columns")
	if err != nil {
		return "", err
	}
	defer os.Remove(tmp.Name()) // after the rename: nothing
	bw := bufio.NewWriterSize(tmp, 1<<20)
	cw := &crcWriter{w: bw}
	var n4 [4]byte
	cw.Write([]byte(colMagic))
	binary.LittleEndian.PutUint32(n4[:], uint32(len(head)))
	cw.Write(n4[:])
	cw.Write(head)
	buf := make([]byte, 0, 1<<16)
	for _, name := range f.names {
		c := f.cols[name]
		if c.Kind == Categorical {
			for _, v := range c.Codes {
				buf = binary.LittleEndian.AppendUint32(buf, uint32(v))
				if len(buf) == cap(buf) {
					cw.Write(buf)
					buf = buf[:0]
				}
			}
		} else {
			for _, v := range c.Num {
				buf = binary.LittleEndian.AppendUint64(buf, math.Float64bits(v))
				if len(buf) == cap(buf) {
					cw.Write(buf)
					buf = buf[:0]
				}
			}
		}
	}
	cw.Write(buf)
	binary.LittleEndian.PutUint32(n4[:], cw.crc)
	bw.Write(n4[:])
	if err := bw.Flush(); err != nil {
		tmp.Close()
		return "", err
	}
	if err := tmp.Close(); err != nil {
		return "", err
	}
	if err := os.Rename(tmp.Name(), cachePath(dir, id.Source)); err != nil {
		return "", err
	}
	return fingerprint(head, cw.crc), nil
}

// fingerprint names the data of a cache: its header (the source's identity
// and the schema) and the checksum of its values.
func fingerprint(head []byte, crc uint32) string {
	h := sha256.New()
	h.Write(head)
	binary.Write(h, binary.LittleEndian, crc)
	return hex.EncodeToString(h.Sum(nil))
}

var errNoCache = errors.New("no usable cache")

// readColumnCache reads the cache of the source id from dir. It returns
// errNoCache (possibly wrapped) when there is none, or it is for another
// state of the file, or it is damaged; the frame and the data fingerprint
// otherwise.
func readColumnCache(dir string, id colHeader) (*Frame, string, error) {
	fh, err := os.Open(cachePath(dir, id.Source))
	if err != nil {
		return nil, "", errNoCache
	}
	defer fh.Close()
	r := bufio.NewReaderSize(fh, 1<<20)
	var crc uint32
	read := func(p []byte) error {
		if _, err := io.ReadFull(r, p); err != nil {
			return fmt.Errorf("%w: %v", errNoCache, err)
		}
		crc = crc32.Update(crc, castagnoli, p)
		return nil
	}
	magic := make([]byte, len(colMagic))
	if err := read(magic); err != nil || string(magic) != colMagic {
		return nil, "", errNoCache
	}
	var n4 [4]byte
	if err := read(n4[:]); err != nil {
		return nil, "", err
	}
	hl := binary.LittleEndian.Uint32(n4[:])
	if hl > 1<<30 {
		return nil, "", errNoCache
	}
	head := make([]byte, hl)
	if err := read(head); err != nil {
		return nil, "", err
	}
	var h colHeader
	dec := json.NewDecoder(bytes.NewReader(head))
	if err := dec.Decode(&h); err != nil || !h.sameSource(id) || h.Rows < 0 {
		return nil, "", errNoCache
	}
	f := &Frame{rows: h.Rows, cols: make(map[string]*Column, len(h.Columns)), file: id.Source}
	buf := make([]byte, 1<<16)
	for _, s := range h.Columns {
		c := &Column{Name: s.Name, Kind: s.Kind, Missing: s.Missing, Levels: s.Levels, textAt: s.TextAt}
		if s.Issue != "" {
			c.issue = errors.New(s.Issue)
		}
		width := 8
		if s.Kind == Categorical {
			width = 4
			c.Codes = make([]int32, h.Rows)
		} else {
			c.Num = make([]float64, h.Rows)
		}
		for at := 0; at < h.Rows; {
			k := min(h.Rows-at, len(buf)/width)
			b := buf[:k*width]
			if err := read(b); err != nil {
				return nil, "", err
			}
			if width == 4 {
				for i := range k {
					c.Codes[at+i] = int32(binary.LittleEndian.Uint32(b[4*i:]))
				}
			} else {
				for i := range k {
					c.Num[at+i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
				}
			}
			at += k
		}
		if _, dup := f.cols[s.Name]; dup {
			return nil, "", errNoCache
		}
		f.names = append(f.names, s.Name)
		f.cols[s.Name] = c
	}
	want := crc
	if _, err := io.ReadFull(r, n4[:]); err != nil || binary.LittleEndian.Uint32(n4[:]) != want {
		return nil, "", errNoCache
	}
	if _, err := r.ReadByte(); err != io.EOF { // trailing bytes: not ours
		return nil, "", errNoCache
	}
	return f, fingerprint(head, want), nil
}

// LoadCached is LoadProgress with a columnar cache in the folder dir (""
// for none): when dir holds the cache of this file as it is now (same
// absolute path, size, modification time and edges; see colMagic), the
// columns are read from it instead of parsing the CSV; otherwise the CSV is
// parsed and the cache (re)written. A propensity fit of a Study loaded this
// way keeps its coefficients in dir too, and a later fit of the same data
// and specification starts from them (one confirming Newton step). The
// kernel passes its session folder, which GoNB removes when the kernel
// stops. A cache that cannot be written is skipped silently: the result is
// the same, only not faster next time.
func LoadCached(path, dir string, progress func(done, total int)) *Study {
	if dir == "" {
		return LoadProgress(path, progress)
	}
	id, err := sourceID(path)
	if err != nil {
		return LoadProgress(path, progress) // it reports the file's problem
	}
	if f, fp, err := readColumnCache(dir, id); err == nil {
		f.file = path
		return &Study{src: f, file: path, fingerprint: fp, fitDir: dir}
	}
	s := LoadProgress(path, progress)
	if s.err != nil {
		return s
	}
	// Cache what was parsed only if the file did not change meanwhile.
	if now, err := sourceID(path); err == nil && now.sameSource(id) {
		if f, ok := s.src.(*Frame); ok {
			if fp, err := writeColumnCache(dir, id, f); err == nil {
				s.fingerprint, s.fitDir = fp, dir
			}
		}
	}
	return s
}

// fitKey names a propensity fit: the data fingerprint and everything that
// specifies the fit (roles, coding, rows kept, options, terms). "" when the
// Study has no fit cache.
func (s *Study) fitKey(d *Design, o logitOptions) string {
	if s.fitDir == "" || s.fingerprint == "" {
		return ""
	}
	h := sha256.New()
	w := func(v any) { fmt.Fprintf(h, "%q\n", fmt.Sprint(v)) }
	w(s.fingerprint)
	w(s.treat)
	w(s.treatedLevel)
	w(s.outcome)
	w(s.covariates)
	cats := make([]string, 0, len(s.asCategory))
	for k, v := range s.asCategory {
		if v {
			cats = append(cats, k)
		}
	}
	slices.Sort(cats)
	w(cats)
	w(s.dropIncomp)
	w(math.Float64bits(o.ridge))
	w(o.maxIter)
	w(d.N)
	for _, t := range d.Terms {
		w(t.Name)
	}
	return hex.EncodeToString(h.Sum(nil))
}

func fitStartPath(dir, key string) string {
	return filepath.Join(dir, "counterpart-fit-"+key[:32]+".start")
}

// readFitStart returns the coefficients kept for key (nil when there are
// none, they are damaged or have another length).
func readFitStart(dir, key string, p int) []float64 {
	if dir == "" || key == "" {
		return nil
	}
	b, err := os.ReadFile(fitStartPath(dir, key))
	if err != nil || len(b) != len(key)+8*p+4 || string(b[:len(key)]) != key ||
		crc32.Checksum(b[:len(b)-4], castagnoli) != binary.LittleEndian.Uint32(b[len(b)-4:]) {
		return nil
	}
	beta := make([]float64, p)
	for j := range beta {
		beta[j] = math.Float64frombits(binary.LittleEndian.Uint64(b[len(key)+8*j:]))
		if math.IsNaN(beta[j]) || math.IsInf(beta[j], 0) {
			return nil
		}
	}
	return beta
}

// writeFitStart keeps beta for key (best effort, atomically).
func writeFitStart(dir, key string, beta []float64) {
	if dir == "" || key == "" {
		return
	}
	b := []byte(key)
	for _, v := range beta {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	b = binary.LittleEndian.AppendUint32(b, crc32.Checksum(b, castagnoli))
	tmp, err := os.CreateTemp(dir, ".counterpart-fit-*")
	if err != nil {
		return
	}
	_, werr := tmp.Write(b)
	if cerr := tmp.Close(); werr != nil || cerr != nil {
		os.Remove(tmp.Name())
		return
	}
	if os.Rename(tmp.Name(), fitStartPath(dir, key)) != nil {
		os.Remove(tmp.Name())
	}
}
