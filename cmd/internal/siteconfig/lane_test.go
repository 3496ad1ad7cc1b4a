package siteconfig

import "testing"

// TestFollowLane: a site may follow a lane; the mode is read in any case.
func TestFollowLane(t *testing.T) {
	for name, in := range map[string]string{"lower": "follow: lane\n", "upper": "follow: LANE\n"} {
		t.Run(name, func(t *testing.T) {
			s, err := Parse("lane.yaml", []byte(in))
			if err != nil {
				t.Fatal(err)
			}
			if s.Follow != "lane" {
				t.Errorf("follow %q", s.Follow)
			}
		})
	}
}
