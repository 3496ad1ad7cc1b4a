// Package status serves the live status page of a hewline run: an HTTP
// server, bound to the loopback interface unless told otherwise, with
//
//	/             a self-contained HTML page (no outside URLs): the live
//	              annotated view, offset and confidence over the last
//	              minutes, the tracking state, a big alarm banner and the
//	              health of the camera and outputs
//	/state.json   the current state and the history the page plots
//	/stream.mjpg  the annotated view as MJPEG (multipart/x-mixed-replace)
//	/frame.jpg    the latest annotated frame as one JPEG
//	/metrics      counters, gauges and a latency histogram in the
//	              Prometheus text exposition format (version 0.0.4)
//
// A Server is also a pipeline sink: pass it in pipeline.Config.Sinks and it
// records every Result. Frame never waits for a network client: it copies
// what it needs under a short lock, encodes at most Options.MaxFPS JPEGs a
// second and only while someone watches the stream, and clients read the
// latest JPEG from a one-frame slot.
//
// The page is a view for people, not a safety function. It shows a red
// banner when the tracker raises the alarm, and also when the page itself
// can no longer trust what it shows: the server stopped answering or no
// result arrived for Options.StaleAfter. The vehicle's own fail-safe must
// never depend on this page.
//
// Binding to a non-loopback address needs both Options.AllowRemote and an
// access token; with a token every request must carry it, as
// "Authorization: Bearer TOKEN" or "?token=TOKEN".
package status
