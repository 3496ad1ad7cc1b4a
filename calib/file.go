package calib

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"
)

// FormatV1 is the Format of the calibration files this package writes.
const FormatV1 = "hewline-calib/1"

// File is a calibration file: JSON, one object, with these fields (see
// testdata/example.calib.json):
//
//	format      "hewline-calib/1"
//	tool        the program and version that wrote it
//	created     RFC 3339 time it was written
//	image_size  [width, height] in pixels of the frames it is valid for
//	lens        optional: fx, fy, cx, cy (px), dist [k1,k2,p1,p2,k3],
//	            rms_px, views, board {cols, rows, square_mm}
//	floor       optional: h (9 numbers, row-major, undistorted px → mm),
//	            method, rms_mm, height_mm, pitch_deg, lookahead_mm,
//	            tape_width_mm
type File struct {
	Format    string `json:"format"`
	Tool      string `json:"tool"`
	Created   string `json:"created"`
	ImageSize [2]int `json:"image_size"`
	Lens      *Lens  `json:"lens,omitempty"`
	Floor     *Floor `json:"floor,omitempty"`
}

// ErrInvalid: a calibration file is corrupt or holds impossible values.
// Load's errors wrap it.
var ErrInvalid = errors.New("invalid calibration file")

// ErrFrameSize: the frames are not the size the calibration was made for.
var ErrFrameSize = errors.New("frame size does not match the calibration")

// Load reads and validates a calibration file. Every error names the file
// and says what to do.
func Load(path string) (*File, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("calib: %w", err)
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var f File
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("calib: %s: %w: not a readable calibration (%v); write it again with hewline calib lens or hewline calib floor", path, ErrInvalid, err)
	}
	if err := f.Validate(); err != nil {
		return nil, fmt.Errorf("calib: %s: %w", path, err)
	}
	return &f, nil
}

// Validate checks every value. Its errors wrap ErrInvalid.
func (f *File) Validate() error {
	if f.Format != FormatV1 {
		return fmt.Errorf("%w: format %q, expected %q; write it again with hewline calib", ErrInvalid, f.Format, FormatV1)
	}
	if f.Created != "" {
		if _, err := time.Parse(time.RFC3339, f.Created); err != nil {
			return fmt.Errorf("%w: created %q is not an RFC 3339 time", ErrInvalid, f.Created)
		}
	}
	w, h := f.ImageSize[0], f.ImageSize[1]
	if w <= 0 || h <= 0 || w > 20000 || h > 20000 {
		return fmt.Errorf("%w: image_size %dx%d is impossible; write it again with hewline calib lens", ErrInvalid, w, h)
	}
	if f.Lens == nil && f.Floor == nil {
		return fmt.Errorf("%w: it has neither a lens nor a floor section; run hewline calib lens", ErrInvalid)
	}
	if f.Lens != nil {
		if err := f.Lens.check(w, h); err != nil {
			return fmt.Errorf("%w: %v", ErrInvalid, err)
		}
	}
	if f.Floor != nil {
		if err := f.Floor.check(); err != nil {
			return fmt.Errorf("%w: %v", ErrInvalid, err)
		}
		if f.Floor.Method == "pose" && f.Lens == nil {
			return fmt.Errorf("%w: floor method pose needs the lens section; run hewline calib lens first", ErrInvalid)
		}
		// The image centre-bottom, where the stripe is seen, must map to
		// the floor in front of the camera.
		m, err := NewMapper(f)
		if err != nil {
			return fmt.Errorf("%w: %v", ErrInvalid, err)
		}
		if _, ok := m.ToFloor(Pt{float64(w) / 2, float64(h) - 1}); !ok {
			return fmt.Errorf("%w: the floor mapping puts the bottom of the image above the horizon; run hewline calib floor again", ErrInvalid)
		}
	}
	return nil
}

// CheckFrameSize refuses frames of another size than the calibration's.
func (f *File) CheckFrameSize(w, h int) error {
	if w != f.ImageSize[0] || h != f.ImageSize[1] {
		return fmt.Errorf("calib: %w: frames are %dx%d but the calibration is for %dx%d; set the camera to %dx%d or calibrate again at this size",
			ErrFrameSize, w, h, f.ImageSize[0], f.ImageSize[1], f.ImageSize[0], f.ImageSize[1])
	}
	return nil
}

// Save validates f and writes it to path atomically: to a temporary file
// in the same folder, synced, then renamed over path.
func (f *File) Save(path string) error {
	if err := f.Validate(); err != nil {
		return fmt.Errorf("calib: %s: refusing to write: %w", path, err)
	}
	b, err := json.MarshalIndent(f, "", "  ")
	if err != nil {
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	b = append(b, '\n')
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	defer os.Remove(tmp.Name()) // no-op after the rename
	if _, err := tmp.Write(b); err != nil {
		tmp.Close()
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("calib: %s: %w", path, err)
	}
	return nil
}
