package ingest

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"image"
	_ "image/gif"  // register GIF
	_ "image/jpeg" // register JPEG
	_ "image/png"  // register PNG
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"handoff"
)

// IsImageName reports whether a file name has an image extension loop
// reads: .png, .jpg, .jpeg, .gif (any case).
func IsImageName(name string) bool {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".png", ".jpg", ".jpeg", ".gif":
		return true
	}
	return false
}

// ImageReader reads image items from a folder or a list of paths. Each image
// is read once: its SHA-256 is taken and it is decoded in full, so a broken
// file is refused at import. The image stays where it is; the item records
// its absolute path.
type ImageReader struct {
	// folder mode
	paths []string // relative to root, slash-separated
	root  string
	i     int
	// list mode
	list    *bufio.Scanner
	listDir string
	name    string
	line    int
	n       int // images read (list mode)

	loc Location
}

// NewImageFolder lists the image files under dir (walked recursively, in
// lexical order; other files are skipped). Item ids are the paths relative
// to dir, with forward slashes.
func NewImageFolder(dir string) (*ImageReader, error) {
	root, err := filepath.Abs(dir)
	if err != nil {
		return nil, err
	}
	ir := &ImageReader{root: root, name: dir}
	err = filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return &Error{File: p, Err: err}
		}
		if d.IsDir() || !IsImageName(d.Name()) {
			return nil
		}
		rel, err := filepath.Rel(root, p)
		if err != nil {
			return err
		}
		ir.paths = append(ir.paths, filepath.ToSlash(rel))
		return nil
	})
	if err != nil {
		return nil, err
	}
	return ir, nil
}

// NewImageList reads image paths from r, one per line, in a list file called
// name; blank lines and lines starting with # are skipped. Relative paths are
// taken relative to baseDir (normally the list file's folder). Item ids are
// the paths as written.
func NewImageList(r io.Reader, name, baseDir string) *ImageReader {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64<<10), MaxField)
	return &ImageReader{list: sc, listDir: baseDir, name: name}
}

// Len returns the number of images in folder mode, -1 in list mode.
func (ir *ImageReader) Len() int {
	if ir.list != nil {
		return -1
	}
	return len(ir.paths)
}

// Where returns the place of the image last read: the list file and line,
// or the image file itself in folder mode.
func (ir *ImageReader) Where() Location { return ir.loc }

// Next returns the next image item, or io.EOF at the end. Errors are *Error.
func (ir *ImageReader) Next() (handoff.Item, error) {
	if ir.list == nil {
		if ir.i >= len(ir.paths) {
			if len(ir.paths) == 0 {
				return handoff.Item{}, errf(Location{File: ir.name}, "", "no images (.png, .jpg, .jpeg or .gif files) in this folder or below it")
			}
			return handoff.Item{}, io.EOF
		}
		rel := ir.paths[ir.i]
		ir.i++
		abs := filepath.Join(ir.root, filepath.FromSlash(rel))
		ir.loc = Location{File: filepath.Join(ir.name, filepath.FromSlash(rel))}
		if err := checkID(ir.loc, "path", rel); err != nil {
			return handoff.Item{}, err
		}
		return ir.read(rel, abs)
	}
	for {
		if !ir.list.Scan() {
			if err := ir.list.Err(); err != nil {
				ir.line++
				ir.loc = Location{File: ir.name, Line: ir.line}
				return handoff.Item{}, errf(ir.loc, "path", "%v", err)
			}
			if ir.n == 0 {
				return handoff.Item{}, emptyFile(ir.name, "image paths")
			}
			return handoff.Item{}, io.EOF
		}
		ir.line++
		ir.loc = Location{File: ir.name, Line: ir.line}
		raw := ir.list.Bytes()
		if !isUTF8(raw) {
			return handoff.Item{}, errf(ir.loc, "path", "not UTF-8 text")
		}
		p := strings.TrimSpace(string(raw))
		if p == "" || strings.HasPrefix(p, "#") {
			continue
		}
		ir.n++
		if err := checkID(ir.loc, "path", p); err != nil {
			return handoff.Item{}, err
		}
		return readImage(ir.loc, "path", p, ir.listDir)
	}
}

func (ir *ImageReader) read(id, abs string) (handoff.Item, error) {
	it, err := readImage(ir.loc, "path", abs, "")
	it.ID = id
	return it, err
}

// readImage reads the image at p (relative to baseDir unless absolute),
// decodes it in full and hashes it. The item's id is p as given.
func readImage(loc Location, field, p, baseDir string) (handoff.Item, error) {
	abs := p
	if !filepath.IsAbs(abs) {
		abs = filepath.Join(baseDir, p)
	}
	abs, err := filepath.Abs(abs)
	if err != nil {
		return handoff.Item{}, errf(loc, field, "%v", err)
	}
	data, err := os.ReadFile(abs)
	if err != nil {
		return handoff.Item{}, errf(loc, field, "unreadable image: %v", err)
	}
	if _, _, err := image.Decode(bytes.NewReader(data)); err != nil {
		return handoff.Item{}, errf(loc, field, "corrupt image %s: %v", abs, err)
	}
	sum := sha256.Sum256(data)
	return handoff.Item{ID: p, Kind: handoff.KindImage, Path: abs, SHA256: hex.EncodeToString(sum[:])}, nil
}
