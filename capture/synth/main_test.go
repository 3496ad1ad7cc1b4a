package synth

import (
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/matcheck"
)

// TestMain fails the run when a test leaks a Mat (run with -tags
// matprofile for the count to be kept).
func TestMain(m *testing.M) { matcheck.Main(m) }

// BenchmarkRender640 measures one 640×480 frame of the demo scenario.
func BenchmarkRender640(b *testing.B) {
	sc, err := Lookup("weave")
	if err != nil {
		b.Fatal(err)
	}
	sc.Frames = 1 << 30
	r, err := New(sc)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMat()
	defer m.Close()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := r.Read(&m); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkRenderScenario measures one frame of each costlier scenario.
func BenchmarkRenderScenario(b *testing.B) {
	for _, name := range []string{"rack-shadows", "glare", "shake", "walker"} {
		b.Run(name, func(b *testing.B) {
			sc, err := Lookup(name)
			if err != nil {
				b.Fatal(err)
			}
			sc.Frames = 1 << 30
			r, err := New(sc)
			if err != nil {
				b.Fatal(err)
			}
			m := gocv.NewMat()
			defer m.Close()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := r.Read(&m); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
