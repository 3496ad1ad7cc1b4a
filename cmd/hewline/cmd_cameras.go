package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"sort"
	"strings"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/v4l2"
)

func init() {
	register(&command{
		name:    "cameras",
		summary: "list the cameras (V4L2 devices) with their formats, sizes and frame rates",
		run:     runCameras,
	})
}

// noCameraHelp lists the likely causes when no camera is found.
const noCameraHelp = `likely causes:
  - the camera is not plugged in, or its cable or USB hub is loose or unpowered
  - the driver is not loaded (USB cameras use uvcvideo: "lsmod | grep uvcvideo")
  - inside a container: the device was not passed in (--device /dev/video0)`

// runCameras lists cameras. Finding none is a legitimate answer for a
// listing: it is said plainly with the likely causes, and the exit code is
// 0. Opening a missing camera in "run" or "record" is what fails.
func runCameras(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("cameras", "", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("cameras takes no arguments (got %q)", fs.Args())
	}
	devs, err := v4l2.List()
	if errors.Is(err, capture.ErrNoHardware) {
		fmt.Fprintln(stdout, "no cameras: this platform has no V4L2 (cameras work on Linux only)")
		return nil
	}
	if err != nil {
		return err
	}
	if len(devs) == 0 {
		fmt.Fprintln(stdout, "no cameras found (no /dev/video* device)")
		fmt.Fprintln(stdout, noCameraHelp)
		return nil
	}
	usable := 0
	for _, d := range devs {
		printCamera(stdout, d)
		if d.Err == nil && len(d.Modes) > 0 {
			usable++
		}
	}
	if usable == 0 {
		fmt.Fprintln(stdout, "\nno usable camera: every device failed to answer (see above)")
		fmt.Fprintln(stdout, noCameraHelp)
		fmt.Fprintln(stdout, `  - permissions: add the user to the "video" group and log in again`)
	}
	return nil
}

func printCamera(w io.Writer, d v4l2.DeviceInfo) {
	title := d.Path
	if d.Name != "" {
		title += fmt.Sprintf("  %q", d.Name)
	}
	if d.Bus != "" {
		title += "  " + d.Bus
	}
	fmt.Fprintln(w, title)
	for _, l := range d.Links {
		fmt.Fprintf(w, "  stable name: %s\n", l)
	}
	if d.Err != nil {
		fmt.Fprintf(w, "  cannot query: %v\n", d.Err)
		return
	}
	byPix := map[v4l2.PixelFormat][]v4l2.Mode{}
	for _, m := range d.Modes {
		byPix[m.Pixel] = append(byPix[m.Pixel], m)
	}
	pixels := make([]v4l2.PixelFormat, 0, len(d.Formats))
	for p := range d.Formats {
		pixels = append(pixels, p)
	}
	sort.Slice(pixels, func(i, j int) bool { return pixels[i].String() < pixels[j].String() })
	for _, p := range pixels {
		note := ""
		if !p.Decodable() {
			note = " (hewline cannot decode this format)"
		}
		fmt.Fprintf(w, "  %s %s%s\n", p, d.Formats[p], note)
		for _, line := range sizeLines(byPix[p]) {
			fmt.Fprintf(w, "    %s\n", line)
		}
	}
	if m, err := v4l2.ChooseMode(d.Modes, v4l2.Preference{}); err == nil {
		fmt.Fprintf(w, "  default: %v\n", m)
	} else {
		fmt.Fprintf(w, "  default: none (%v)\n", err)
	}
}

// sizeLines groups modes by size: "640x480 @ 60, 30 fps".
func sizeLines(modes []v4l2.Mode) []string {
	var order []string
	rates := map[string][]string{}
	for _, m := range modes {
		k := fmt.Sprintf("%dx%d", m.Size.X, m.Size.Y)
		if _, ok := rates[k]; !ok {
			order = append(order, k)
		}
		rates[k] = append(rates[k], fmt.Sprintf("%.4g", m.FPS))
	}
	out := make([]string, 0, len(order))
	for _, k := range order {
		out = append(out, fmt.Sprintf("%s @ %s fps", k, strings.Join(rates[k], ", ")))
	}
	return out
}
