package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/calib"
	"github.com/hewline/hewline/capture"
)

func init() {
	register(&command{
		name:    "calib",
		summary: "calibrate the lens (chessboard views) and the floor (marks, a flat board, or height and pitch)",
		run:     runCalib,
	})
}

const calibSynopsis = `lens|floor [options] ...

  hewline calib lens [-board 9x6] [-square 25] [-o FILE] IMAGES...|FOLDER|CLIP
  hewline calib floor -calib FILE (-points MARKS.json | -board 9x6 -square 25 -at X,Y IMAGE | -height MM -pitch DEG) [-birdseye OUT.png [-frame IMAGE]]
Run "hewline calib lens -h" or "hewline calib floor -h" for each one's options.

Floor positions are mm from the vehicle's reference point: FORWARD along its
axis, RIGHT to its right. A marks file (-points) is JSON:
  {"image_size": [640, 480],
   "points": [{"image_px": [211.4, 310.5], "floor_mm": [800, -300]}, ...]}`

func runCalib(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		return usagef("say lens or floor")
	}
	switch args[0] {
	case "lens":
		return runCalibLens(ctx, args[1:], stdout, stderr)
	case "floor":
		return runCalibFloor(ctx, args[1:], stdout, stderr)
	case "-h", "-help", "--help", "help":
		fmt.Fprintf(stderr, "usage: hewline calib %s\n", calibSynopsis)
		return errHelp
	}
	return usagef("unknown calib step %q: say lens or floor", args[0])
}

// parseBoard reads "COLSxROWS" (inner corners).
func parseBoard(s string, square float64) (calib.BoardSpec, error) {
	c, r, ok := strings.Cut(strings.ToLower(s), "x")
	cols, err1 := strconv.Atoi(c)
	rows, err2 := strconv.Atoi(r)
	if !ok || err1 != nil || err2 != nil || cols < 3 || rows < 3 {
		return calib.BoardSpec{}, usagef("-board %q: give inner corners as COLSxROWS, e.g. 9x6 for a board of 10x7 squares", s)
	}
	if !(square > 0) || math.IsInf(square, 0) {
		return calib.BoardSpec{}, usagef("-square %v: give the printed square's side in mm", square)
	}
	return calib.BoardSpec{Cols: cols, Rows: rows, Square: calib.Millimetres(square)}, nil
}

var imageExts = map[string]bool{".jpg": true, ".jpeg": true, ".png": true, ".bmp": true, ".tif": true, ".tiff": true, ".pgm": true, ".ppm": true}

func runCalibLens(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("calib", "lens [-board 9x6] [-square 25] [-o FILE] IMAGES...|FOLDER|CLIP", stderr)
	boardS := fs.String("board", "9x6", "chessboard inner corners, COLSxROWS (a board of 10x7 squares is 9x6)")
	square := fs.Float64("square", 25, "side of one printed square, mm (measure the print)")
	out := fs.String("o", "hewline.calib.json", "calibration file to write")
	every := fs.Int("every", 5, "for a clip: examine one frame in this many")
	maxViews := fs.Int("max", 20, "for a clip: views to keep, spread over the image")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	board, err := parseBoard(*boardS, *square)
	if err != nil {
		return err
	}
	if fs.NArg() == 0 {
		return usagef("give chessboard images, a folder of them, or a clip")
	}
	views, err := loadLensViews(fs.Args(), board, *every, *maxViews, stdout)
	defer func() {
		for _, v := range views {
			v.Img.Close()
		}
	}()
	if err != nil {
		return err
	}
	if ctx.Err() != nil {
		return ctx.Err()
	}
	lens, rep, err := calib.CalibrateLens(views, board)
	printLensReport(stdout, rep)
	if err != nil {
		what := fs.Arg(0)
		if fs.NArg() > 1 {
			what = fmt.Sprintf("%s and %d more", what, fs.NArg()-1)
		}
		return fmt.Errorf("%s: %w", what, err)
	}
	var size [2]int
	for _, v := range views {
		if !v.Img.Empty() {
			size = [2]int{v.Img.Cols(), v.Img.Rows()}
			break
		}
	}
	f := &calib.File{Format: calib.FormatV1, Tool: "hewline " + version, Created: time.Now().UTC().Format(time.RFC3339), ImageSize: size, Lens: &lens}
	if old, err := calib.Load(*out); err == nil && old.Floor != nil {
		fmt.Fprintf(stdout, "note: %s had a floor calibration; it depends on the lens, so it is dropped: run hewline calib floor again\n", *out)
	}
	if err := f.Save(*out); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "lens: fx %.2f fy %.2f cx %.2f cy %.2f px; dist k1 %.5f k2 %.5f p1 %.5f p2 %.5f k3 %.5f\n",
		lens.Fx, lens.Fy, lens.Cx, lens.Cy, lens.Dist[0], lens.Dist[1], lens.Dist[2], lens.Dist[3], lens.Dist[4])
	fmt.Fprintf(stdout, "reprojection error %.3f px over %d views (under 0.5 px is good; over 1 px: retake sharper views)\n", rep.RMSPx, rep.Used)
	fmt.Fprintf(stdout, "wrote %s (%dx%d)\n", *out, size[0], size[1])
	return nil
}

// loadLensViews reads images, a folder or a clip into views (the caller
// closes their Mats, also on error).
func loadLensViews(args []string, board calib.BoardSpec, every, maxViews int, stdout io.Writer) ([]calib.View, error) {
	var paths []string
	if len(args) == 1 {
		st, err := os.Stat(args[0])
		if err != nil {
			return nil, fmt.Errorf("%s: %w", args[0], errNotFound(err))
		}
		if st.IsDir() {
			ents, err := os.ReadDir(args[0])
			if err != nil {
				return nil, fmt.Errorf("%s: %w", args[0], err)
			}
			for _, e := range ents {
				if !e.IsDir() && imageExts[strings.ToLower(filepath.Ext(e.Name()))] {
					paths = append(paths, filepath.Join(args[0], e.Name()))
				}
			}
			sort.Slice(paths, func(i, j int) bool { return capture.NaturalLess(paths[i], paths[j]) })
			if len(paths) == 0 {
				return nil, fmt.Errorf("%s: no images (.jpg, .png, ...) in this folder", args[0])
			}
		} else if !imageExts[strings.ToLower(filepath.Ext(args[0]))] {
			src, err := capture.OpenVideo(args[0])
			if err != nil {
				return nil, fmt.Errorf("%s: %w", args[0], err)
			}
			defer src.Close()
			views, seen, found, err := calib.PickViews(src, board, calib.PickOptions{Every: every, Max: maxViews})
			fmt.Fprintf(stdout, "%s: examined %d frames, board found in %d, picked %d spread-out views\n", args[0], seen, found, len(views))
			if err != nil {
				return views, fmt.Errorf("%s: %w", args[0], err)
			}
			return views, nil
		}
	}
	if paths == nil {
		paths = args
	}
	var views []calib.View
	for _, p := range paths {
		if _, err := os.Stat(p); err != nil {
			return views, fmt.Errorf("%s: %w", p, errNotFound(err))
		}
		// An unreadable image gives an empty Mat: CalibrateLens rejects
		// it with the reason.
		views = append(views, calib.View{Name: p, Img: gocv.IMRead(p, gocv.IMReadColor)})
	}
	return views, nil
}

func errNotFound(err error) error {
	if errors.Is(err, os.ErrNotExist) {
		return capture.ErrNotFound
	}
	return err
}

func printLensReport(w io.Writer, rep calib.LensReport) {
	for _, v := range rep.Views {
		switch {
		case v.Used:
			fmt.Fprintf(w, "  used     %-40s %.3f px\n", v.Name, v.RMSPx)
		default:
			fmt.Fprintf(w, "  REJECTED %-40s %s\n", v.Name, v.Reason)
		}
	}
}

// marksFile is the -points file: marked floor points, each with its pixel
// in a raw frame and its measured floor position.
//
//	{"image_size": [640, 480],   // optional when -calib has a lens
//	 "points": [{"image_px": [412.5, 388.0], "floor_mm": [800, -300]}, ...]}
//
// floor_mm is (forward, right) from the vehicle's reference point.
type marksFile struct {
	ImageSize [2]int `json:"image_size"`
	Points    []struct {
		ImagePx [2]float64 `json:"image_px"`
		FloorMM [2]float64 `json:"floor_mm"`
	} `json:"points"`
}

func runCalibFloor(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("calib", "floor -calib FILE (-points MARKS.json | -board 9x6 -square 25 -at X,Y IMAGE | -height MM -pitch DEG) [-birdseye OUT.png [-frame IMAGE]]\n\nmarks file: {\"image_size\": [W, H], \"points\": [{\"image_px\": [x, y], \"floor_mm\": [forward, right]}, ...]}", stderr)
	calibPath := fs.String("calib", "hewline.calib.json", "calibration file to read (its lens) and to write the floor into")
	points := fs.String("points", "", "marks file (JSON): image pixels and measured floor positions of 4 or more taped marks")
	boardS := fs.String("board", "", "chessboard laid flat, inner corners COLSxROWS; give the frame IMAGE as the argument")
	square := fs.Float64("square", 25, "with -board: side of one square, mm")
	at := fs.String("at", "", "with -board: floor position of the board's centre, FORWARD,RIGHT in mm")
	height := fs.Float64("height", 0, "camera lens height above the floor, mm (with -pitch)")
	pitch := fs.Float64("pitch", 0, "camera downward tilt from horizontal, degrees (with -height)")
	lookahead := fs.Float64("lookahead", 0, "distance ahead at which the offset is reported, mm (default 1000)")
	tape := fs.Float64("tape", 0, "the stripe's real width, mm (common practice 50 to 100); 0 = unknown")
	birdseye := fs.String("birdseye", "", "write a bird's-eye PNG with a 100 mm grid here, to check by eye")
	frame := fs.String("frame", "", "frame for -birdseye (default: the -board IMAGE)")
	size := fs.String("size", "", "frame size WxH, when -calib has no lens yet (marks method only)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	methods := 0
	for _, on := range []bool{*points != "", *boardS != "", *height != 0 || *pitch != 0} {
		if on {
			methods++
		}
	}
	if methods != 1 {
		return usagef("choose one way: -points MARKS.json, -board COLSxROWS IMAGE, or -height MM -pitch DEG")
	}
	if !(*lookahead >= 0) || !(*tape >= 0) {
		return usagef("-lookahead and -tape must be 0 or more mm")
	}

	f, err := calib.Load(*calibPath)
	switch {
	case err == nil:
	case errors.Is(err, os.ErrNotExist) && *points != "":
		f = &calib.File{Format: calib.FormatV1}
	case errors.Is(err, os.ErrNotExist):
		return fmt.Errorf("%s: no calibration file: run hewline calib lens -o %s first", *calibPath, *calibPath)
	default:
		return err
	}
	if *size != "" {
		w, h, ok := strings.Cut(*size, "x")
		wi, e1 := strconv.Atoi(w)
		hi, e2 := strconv.Atoi(h)
		if !ok || e1 != nil || e2 != nil || wi <= 0 || hi <= 0 {
			return usagef("-size %q: give WIDTHxHEIGHT in pixels", *size)
		}
		if f.Lens != nil && (wi != f.ImageSize[0] || hi != f.ImageSize[1]) {
			return fmt.Errorf("%s: -size %s differs from the lens calibration's %dx%d", *calibPath, *size, f.ImageSize[0], f.ImageSize[1])
		}
		f.ImageSize = [2]int{wi, hi}
	}

	var fl calib.Floor
	var rep *calib.FloorReport
	var boardFrame gocv.Mat
	defer func() {
		if boardFrame.Ptr() != nil {
			boardFrame.Close()
		}
	}()
	switch {
	case *points != "":
		b, err := os.ReadFile(*points)
		if err != nil {
			return fmt.Errorf("%s: %w", *points, errNotFound(err))
		}
		var mf marksFile
		dec := json.NewDecoder(strings.NewReader(string(b)))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&mf); err != nil {
			return fmt.Errorf("%s: not a marks file (%v); see hewline calib floor -h", *points, err)
		}
		if mf.ImageSize != [2]int{} {
			if f.ImageSize != [2]int{} && mf.ImageSize != f.ImageSize {
				return fmt.Errorf("%s: marks were taken on %dx%d frames but %s is for %dx%d; mark them again at that size", *points, mf.ImageSize[0], mf.ImageSize[1], *calibPath, f.ImageSize[0], f.ImageSize[1])
			}
			f.ImageSize = mf.ImageSize
		}
		if f.ImageSize == [2]int{} {
			return fmt.Errorf("%s: give image_size in the marks file or -size WxH (no lens calibration in %s)", *points, *calibPath)
		}
		var img, floor []calib.Pt
		for i, p := range mf.Points {
			if p.ImagePx[0] < 0 || p.ImagePx[1] < 0 || p.ImagePx[0] >= float64(f.ImageSize[0]) || p.ImagePx[1] >= float64(f.ImageSize[1]) {
				return fmt.Errorf("%s: point %d at pixel (%g, %g) is outside the %dx%d frame", *points, i+1, p.ImagePx[0], p.ImagePx[1], f.ImageSize[0], f.ImageSize[1])
			}
			img = append(img, calib.Pt{X: p.ImagePx[0], Y: p.ImagePx[1]})
			floor = append(floor, calib.Pt{X: p.FloorMM[0], Y: p.FloorMM[1]})
		}
		if len(img) < 4 {
			return fmt.Errorf("%s: %d marks; tape and measure at least 4 (5 or more to get an error estimate)", *points, len(img))
		}
		r := calib.FloorReport{}
		if fl, r, err = calib.FloorFromPoints(f.Lens, img, floor); err != nil {
			return fmt.Errorf("%s: %w", *points, err)
		}
		rep = &r
	case *boardS != "":
		board, err := parseBoard(*boardS, *square)
		if err != nil {
			return err
		}
		if fs.NArg() != 1 {
			return usagef("-board needs the frame IMAGE showing the board on the floor")
		}
		fx, fy, ok := strings.Cut(*at, ",")
		X, e1 := strconv.ParseFloat(fx, 64)
		Y, e2 := strconv.ParseFloat(fy, 64)
		if !ok || e1 != nil || e2 != nil {
			return usagef("-at %q: give the board centre's floor position FORWARD,RIGHT in mm, e.g. 900,0", *at)
		}
		if boardFrame, err = readFrame(fs.Arg(0), f); err != nil {
			return err
		}
		r := calib.FloorReport{}
		if fl, r, err = calib.FloorFromBoard(f.Lens, boardFrame, board, calib.Pt{X: X, Y: Y}); err != nil {
			return fmt.Errorf("%s: %w", fs.Arg(0), err)
		}
		rep = &r
	default:
		if f.Lens == nil {
			return fmt.Errorf("%s: -height/-pitch needs a lens calibration: run hewline calib lens first", *calibPath)
		}
		if fl, err = calib.FloorFromPose(*f.Lens, calib.Millimetres(*height), calib.Degrees(*pitch)); err != nil {
			return err
		}
	}
	fl.LookaheadMM, fl.TapeWidthMM = calib.Millimetres(*lookahead), calib.Millimetres(*tape)
	if f.Floor != nil {
		if *lookahead == 0 {
			fl.LookaheadMM = f.Floor.LookaheadMM
		}
		if *tape == 0 {
			fl.TapeWidthMM = f.Floor.TapeWidthMM
		}
	}
	f.Floor = &fl
	f.Tool = "hewline " + version
	f.Created = time.Now().UTC().Format(time.RFC3339)
	if rep != nil {
		for i, p := range rep.Points {
			fmt.Fprintf(stdout, "  mark %2d  px (%.1f, %.1f)  floor (%.0f, %.0f) mm  error %.1f mm, %.2f px\n", i+1, p.Image.X, p.Image.Y, p.Floor.X, p.Floor.Y, p.FloorErrMM, p.ImageErrPx)
		}
		if rep.Exact {
			fmt.Fprintln(stdout, "4 marks fit exactly, so there is no error estimate: add a fifth mark to check the calibration")
		} else {
			fmt.Fprintf(stdout, "floor error: rms %.1f mm, worst %.1f mm\n", rep.RMSMM, rep.MaxErrMM)
			worst := 0
			for i, p := range rep.Points {
				if p.FloorErrMM > rep.Points[worst].FloorErrMM {
					worst = i
				}
			}
			if rep.MaxErrMM > 10 {
				fmt.Fprintf(stdout, "warning: mark %d is %.0f mm off the fit: measure it again (and check it is on the floor, not on a raised edge)\n", worst+1, rep.MaxErrMM)
			}
		}
	}
	// Check the bird's-eye frame before writing anything.
	img := boardFrame
	if *birdseye != "" {
		if *frame != "" {
			if img, err = readFrame(*frame, f); err != nil {
				return err
			}
			defer img.Close()
		} else if img.Ptr() == nil {
			return usagef("-birdseye needs -frame IMAGE (or the -board IMAGE)")
		}
	}
	if err := f.Save(*calibPath); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote the floor (%s) into %s\n", fl.Method, *calibPath)
	if *birdseye == "" {
		return nil
	}
	return writeBirdsEye(*birdseye, img, f, stdout)
}

// readFrame reads an image file as a BGR frame of the calibration's size
// (when the calibration has one); the caller closes it.
func readFrame(path string, f *calib.File) (gocv.Mat, error) {
	if _, err := os.Stat(path); err != nil {
		return gocv.Mat{}, fmt.Errorf("%s: %w", path, errNotFound(err))
	}
	m := gocv.IMRead(path, gocv.IMReadColor)
	if m.Empty() {
		m.Close()
		return gocv.Mat{}, fmt.Errorf("%s: %w: not an image OpenCV can read", path, capture.ErrUnreadable)
	}
	if f.ImageSize != [2]int{} {
		if err := f.CheckFrameSize(m.Cols(), m.Rows()); err != nil {
			m.Close()
			return gocv.Mat{}, fmt.Errorf("%s: %w", path, err)
		}
	} else {
		f.ImageSize = [2]int{m.Cols(), m.Rows()}
	}
	return m, nil
}

// writeBirdsEye renders the floor seen in the lower part of the frame
// (up to 5 m ahead and 2 m each side) at 5 mm per pixel with a 100 mm grid.
func writeBirdsEye(path string, img gocv.Mat, f *calib.File, stdout io.Writer) error {
	m, err := calib.NewMapper(f)
	if err != nil {
		return err
	}
	w, h := float64(f.ImageSize[0]), float64(f.ImageSize[1])
	area := calib.Area{XMin: 1e9, XMax: -1e9, YMin: 1e9, YMax: -1e9}
	for _, p := range []calib.Pt{{X: 0, Y: h - 1}, {X: w - 1, Y: h - 1}, {X: 0, Y: 0.45 * h}, {X: w - 1, Y: 0.45 * h}, {X: w / 2, Y: 0.45 * h}} {
		q, ok := m.ToFloor(p)
		if !ok {
			continue
		}
		area.XMin, area.XMax = min(area.XMin, calib.Millimetres(q.X)), max(area.XMax, calib.Millimetres(q.X))
		area.YMin, area.YMax = min(area.YMin, calib.Millimetres(q.Y)), max(area.YMax, calib.Millimetres(q.Y))
	}
	if area.XMin >= area.XMax || area.YMin >= area.YMax {
		return fmt.Errorf("%s: the lower half of the frame does not map onto the floor: check the floor calibration", path)
	}
	area.XMin, area.XMax = max(area.XMin, -5000), min(area.XMax, area.XMin+5000)
	area.YMin, area.YMax = max(area.YMin, -2000), min(area.YMax, 2000)
	be, err := calib.BirdsEye(img, m, area, 5, 100)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	defer be.Close()
	if !gocv.IMWrite(path, be) {
		return fmt.Errorf("%s: could not write the PNG", path)
	}
	fmt.Fprintf(stdout, "wrote %s: floor %.0f to %.0f mm ahead, %.0f to %.0f mm right, 5 mm/px, 100 mm grid (straight tape must look straight)\n",
		path, area.XMin, area.XMax, area.YMin, area.YMax)
	return nil
}
