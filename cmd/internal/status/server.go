package status

import (
	"context"
	"crypto/subtle"
	_ "embed"
	"errors"
	"fmt"
	"image"
	"net"
	"net/http"
	"strings"
	"sync"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
)

// DefaultAddr is where the status page listens unless told otherwise:
// loopback only, on a port of our own choosing.
const DefaultAddr = "127.0.0.1:8470"

// MinTokenLen is the shortest access token accepted for a remote bind.
const MinTokenLen = 12

// ErrRemoteNeedsToken is returned by New for a non-loopback address
// without AllowRemote and a token.
var ErrRemoteNeedsToken = errors.New("status: a non-loopback address needs AllowRemote and an access token")

// Options configure a Server. The zero value serves on DefaultAddr.
type Options struct {
	// Addr is host:port to listen on (default DefaultAddr). Port 0 picks
	// a free port (see Server.Addr).
	Addr string
	// Token, when set, must come with every request, as
	// "Authorization: Bearer TOKEN" or the query parameter token=TOKEN.
	Token string
	// AllowRemote permits a non-loopback Addr; Token must then be set
	// (at least MinTokenLen characters).
	AllowRemote bool
	// History is how far back the page plots (default 5 minutes).
	History time.Duration
	// Samples bounds the plotted history: at most this many points are
	// kept (default 1500), one per History/Samples plus one at every
	// change of state or alarm.
	Samples int
	// MaxFPS is the most JPEGs encoded per second for the stream
	// (default 10).
	MaxFPS float64
	// Quality is the JPEG quality, 1..100 (default 80).
	Quality int
	// StaleAfter: when no result came for this long, the page and
	// state.json say the view is stale (default 1 s).
	StaleAfter time.Duration
	// Now is the clock (default time.Now).
	Now func() time.Time
}

// Server is the status page and a pipeline.Sink. Create it with New, then
// Start it; Close it after the pipeline has stopped.
type Server struct {
	opts         Options
	now          func() time.Time
	sampleGap    time.Duration
	minEncodeGap time.Duration
	quality      int

	mu            sync.Mutex // guards the fields below
	cur           pipeline.Result
	curFloor      *pipeline.FloorValues
	haveLast      bool
	lastAt        time.Time
	haveFrame     bool
	lastIndex     int
	frames, ticks uint64
	drops         uint64
	sourceDrops   uint64
	skipped       uint64
	alarms        uint64
	stateTime     [numStates]time.Duration
	latency       histogram
	hist          ring
	health        map[string]health
	streamClients int
	jpeg          []byte
	jpegAt        time.Time
	jpegIndex     int
	jpegSize      image.Point
	jpegSeq       uint64
	jpegReady     chan struct{} // closed and replaced at each new JPEG
	encodeErrors  uint64
	lastEncodeErr string

	encMu     sync.Mutex // guards work and encClosed
	work      gocv.Mat
	encClosed bool

	srv     *http.Server
	ln      net.Listener
	done    chan struct{} // closed by Close: ends the streams
	closing sync.Once
	served  chan struct{}
}

// New checks opts and returns a Server that is not yet listening.
func New(opts Options) (*Server, error) {
	if opts.Addr == "" {
		opts.Addr = DefaultAddr
	}
	host, _, err := net.SplitHostPort(opts.Addr)
	if err != nil {
		return nil, fmt.Errorf("status: address %q: %w", opts.Addr, err)
	}
	if !isLoopback(host) {
		if !opts.AllowRemote || opts.Token == "" {
			return nil, fmt.Errorf("%w: %q is not loopback; allow remote access and set a token, or bind to 127.0.0.1", ErrRemoteNeedsToken, opts.Addr)
		}
		if len(opts.Token) < MinTokenLen {
			return nil, fmt.Errorf("status: the access token for a remote bind must be at least %d characters", MinTokenLen)
		}
	}
	if opts.History == 0 {
		opts.History = 5 * time.Minute
	}
	if opts.Samples == 0 {
		opts.Samples = 1500
	}
	if opts.MaxFPS == 0 {
		opts.MaxFPS = 10
	}
	if opts.Quality == 0 {
		opts.Quality = 80
	}
	if opts.StaleAfter == 0 {
		opts.StaleAfter = time.Second
	}
	switch {
	case opts.History < 0:
		return nil, fmt.Errorf("status: history %v must be positive", opts.History)
	case opts.Samples < 2 || opts.Samples > 100000:
		return nil, fmt.Errorf("status: samples %d must be in 2..100000", opts.Samples)
	case opts.MaxFPS < 0 || opts.MaxFPS > 60:
		return nil, fmt.Errorf("status: max fps %g must be in (0, 60]", opts.MaxFPS)
	case opts.Quality < 1 || opts.Quality > 100:
		return nil, fmt.Errorf("status: jpeg quality %d must be in 1..100", opts.Quality)
	case opts.StaleAfter < 0:
		return nil, fmt.Errorf("status: stale-after %v must be positive", opts.StaleAfter)
	}
	now := opts.Now
	if now == nil {
		now = time.Now
	}
	s := &Server{
		opts:         opts,
		now:          now,
		sampleGap:    opts.History / time.Duration(opts.Samples),
		minEncodeGap: time.Duration(float64(time.Second) / opts.MaxFPS),
		quality:      opts.Quality,
		latency:      newHistogram(latencyBuckets),
		hist:         ring{buf: make([]sample, opts.Samples)},
		health:       map[string]health{},
		jpegReady:    make(chan struct{}),
		work:         gocv.NewMat(),
		done:         make(chan struct{}),
		served:       make(chan struct{}),
	}
	s.cur.Est.State = guidance.Seeking
	return s, nil
}

// isLoopback reports whether host names only the loopback interface. An
// empty host (all interfaces) and other host names are not loopback.
func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(strings.TrimSuffix(strings.TrimPrefix(host, "["), "]"))
	return ip != nil && ip.IsLoopback()
}

// Start binds the address and serves in the background until ctx is
// cancelled or Close is called. It returns the bind error, if any.
func (s *Server) Start(ctx context.Context) error {
	ln, err := net.Listen("tcp", s.opts.Addr)
	if err != nil {
		return fmt.Errorf("status: listen %s: %w", s.opts.Addr, err)
	}
	s.ln = ln
	s.srv = &http.Server{
		Handler:           s.Handler(),
		ReadHeaderTimeout: 5 * time.Second,
	}
	go func() {
		defer close(s.served)
		_ = s.srv.Serve(ln) // returns http.ErrServerClosed after Shutdown
	}()
	go func() {
		select {
		case <-ctx.Done():
			s.shutdown()
		case <-s.done:
		}
	}()
	return nil
}

// Addr returns the address the server listens on (useful with port 0), or
// the configured address before Start.
func (s *Server) Addr() string {
	if s.ln != nil {
		return s.ln.Addr().String()
	}
	return s.opts.Addr
}

// shutdown ends the streams, then lets open requests finish for up to 2 s.
func (s *Server) shutdown() {
	s.closing.Do(func() {
		close(s.done)
		if s.srv == nil {
			return
		}
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		if err := s.srv.Shutdown(ctx); err != nil {
			s.srv.Close()
		}
		<-s.served
	})
}

// Close stops serving (gracefully, within 2 s) and frees the Server's
// image buffer. Frame may still be called after Close; it then only
// counts.
func (s *Server) Close() error {
	s.shutdown()
	s.encMu.Lock()
	if !s.encClosed {
		s.encClosed = true
		s.work.Close()
	}
	s.encMu.Unlock()
	return nil
}

// Handler returns the page's routes with the token check in front. Start
// serves it; tests may use it with net/http/httptest.
func (s *Server) Handler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /{$}", s.servePage)
	mux.HandleFunc("GET /state.json", s.serveState)
	mux.HandleFunc("GET /metrics", s.serveMetrics)
	mux.HandleFunc("GET /stream.mjpg", s.serveStream)
	mux.HandleFunc("GET /frame.jpg", s.serveFrame)
	return s.authorize(mux)
}

// authorize rejects requests without the token with 401.
func (s *Server) authorize(next http.Handler) http.Handler {
	if s.opts.Token == "" {
		return next
	}
	want := []byte(s.opts.Token)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		got := r.URL.Query().Get("token")
		if h := r.Header.Get("Authorization"); strings.HasPrefix(h, "Bearer ") {
			got = strings.TrimPrefix(h, "Bearer ")
		}
		if subtle.ConstantTimeCompare([]byte(got), want) != 1 {
			w.Header().Set("WWW-Authenticate", `Bearer realm="hewline status"`)
			http.Error(w, "status: access token missing or wrong", http.StatusUnauthorized)
			return
		}
		next.ServeHTTP(w, r)
	})
}
