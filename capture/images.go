package capture

import (
	"errors"
	"fmt"
	"image"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
	"unicode"

	"gocv.io/x/gocv"
)

// DefaultFolderFPS is the frame rate assumed for an image folder when none
// is given.
const DefaultFolderFPS = 30

// ImageFolder reads the still images of one folder as frames, in natural
// order ("f2.png" before "f10.png"). Timestamps are Index/FPS.
type ImageFolder struct {
	dir   string
	files []string
	info  SourceInfo
	next  int
}

// imageExts are the file endings read from a folder; others are skipped.
var imageExts = map[string]bool{".png": true, ".jpg": true, ".jpeg": true, ".bmp": true, ".tif": true, ".tiff": true, ".ppm": true, ".pgm": true, ".webp": true}

// OpenFolder lists the images in dir. fps 0 means DefaultFolderFPS. The
// first image is decoded to learn the size.
func OpenFolder(dir string, fps float64) (*ImageFolder, error) {
	ents, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("capture: open %s: %w", dir, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("capture: open %s: %v: %w", dir, err, ErrUnreadable)
	}
	var files []string
	for _, e := range ents {
		if e.IsDir() || !imageExts[strings.ToLower(filepath.Ext(e.Name()))] {
			continue
		}
		files = append(files, e.Name())
	}
	if len(files) == 0 {
		return nil, fmt.Errorf("capture: open %s: no images (.png, .jpg, .bmp, .tif, ...) in the folder: %w", dir, ErrUnreadable)
	}
	sort.Slice(files, func(i, j int) bool { return NaturalLess(files[i], files[j]) })
	for i := range files {
		files[i] = filepath.Join(dir, files[i])
	}
	if fps <= 0 {
		fps = DefaultFolderFPS
	}
	f := &ImageFolder{dir: dir, files: files, info: SourceInfo{Name: dir, Kind: "images", FPS: fps, Frames: len(files)}}
	first := gocv.IMRead(files[0], gocv.IMReadColor)
	defer first.Close()
	if first.Empty() {
		return nil, fmt.Errorf("capture: open %s: cannot decode %s: %w", dir, files[0], ErrUnreadable)
	}
	f.info.Size = image.Pt(first.Cols(), first.Rows())
	return f, nil
}

// Info describes the folder.
func (f *ImageFolder) Info() SourceInfo { return f.info }

// Files lists the images in the order they are read.
func (f *ImageFolder) Files() []string { return append([]string(nil), f.files...) }

// Read decodes the next image into dst (8-bit BGR; dst is the caller's and
// is not retained). It returns io.EOF after the last image and an error
// wrapping ErrUnreadable, naming the file, for one that cannot be decoded.
func (f *ImageFolder) Read(dst *gocv.Mat) (FrameInfo, error) {
	if f.next >= len(f.files) {
		return FrameInfo{}, io.EOF
	}
	name := f.files[f.next]
	st, err := os.Stat(name)
	if err != nil || st.Size() == 0 {
		return FrameInfo{}, fmt.Errorf("capture: read %s: missing or empty image: %w", name, ErrUnreadable)
	}
	img := gocv.IMRead(name, gocv.IMReadColor)
	defer img.Close()
	if img.Empty() {
		return FrameInfo{}, fmt.Errorf("capture: read %s: cannot decode the image: %w", name, ErrUnreadable)
	}
	if err := toBGR(img, dst); err != nil {
		return FrameInfo{}, fmt.Errorf("capture: read %s: %w", name, err)
	}
	fi := FrameInfo{
		Index: f.next,
		T:     time.Duration(float64(f.next) / f.info.FPS * float64(time.Second)),
		Size:  image.Pt(dst.Cols(), dst.Rows()),
	}
	f.next++
	return fi, nil
}

// Close does nothing; it exists so that every source can be closed alike.
func (f *ImageFolder) Close() error { return nil }

// NaturalLess orders strings so that runs of digits compare by their
// numeric value: "frame2" < "frame10". Other characters compare by code
// point; on a numeric tie the shorter run (fewer leading zeros) comes first.
func NaturalLess(a, b string) bool {
	ra, rb := []rune(a), []rune(b)
	i, j := 0, 0
	for i < len(ra) && j < len(rb) {
		if unicode.IsDigit(ra[i]) && unicode.IsDigit(rb[j]) {
			si, sj := i, j
			for i < len(ra) && unicode.IsDigit(ra[i]) {
				i++
			}
			for j < len(rb) && unicode.IsDigit(rb[j]) {
				j++
			}
			na := strings.TrimLeft(string(ra[si:i]), "0")
			nb := strings.TrimLeft(string(rb[sj:j]), "0")
			if len(na) != len(nb) {
				return len(na) < len(nb)
			}
			if na != nb {
				return na < nb
			}
			if i-si != j-sj {
				return i-si < j-sj
			}
			continue
		}
		if ra[i] != rb[j] {
			return ra[i] < rb[j]
		}
		i++
		j++
	}
	return len(ra)-i < len(rb)-j
}
