package vision

import "testing"

func benchDetect(b *testing.B, w, h int) {
	s := baseScene(w, h)
	img := s.draw(b)
	defer img.Close()
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		b.Fatal(err)
	}
	defer det.Close()
	det.Detect(img, Hint{}) // allocate the working buffers
	benchCPU(b, func() {
		if d := det.Detect(img, Hint{}); !d.Found {
			b.Fatal(d.Reason)
		}
	})
}

// Run with GOMAXPROCS=1 for the one-core Go figure; cpu-ns/op is the
// process's CPU time per frame, which a loaded machine does not inflate
// as it does ns/op (gocv 0.31 has no call
// to limit OpenCV's own threads; the resize is its only call per frame).
func BenchmarkDetect320(b *testing.B)  { benchDetect(b, 320, 240) }
func BenchmarkDetect640(b *testing.B)  { benchDetect(b, 640, 480) }
func BenchmarkDetect1280(b *testing.B) { benchDetect(b, 1280, 720) }

func BenchmarkDetect640Hint(b *testing.B) {
	s := baseScene(640, 480)
	img := s.draw(b)
	defer img.Close()
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()
	h := Hint{Valid: true, OffsetPx: 25, HeadingDeg: -4, OffsetSigma: 5, HeadingSigma: 2}
	det.Detect(img, h)
	benchCPU(b, func() { det.Detect(img, h) })
}
