package ctlstream

import (
	"errors"
	"fmt"
	"net"
	"strconv"
)

// DefaultPort is hewline's controller-stream UDP port (our own choice).
const DefaultPort = 47211

// DefaultAddr is where NewUDP sends when given an empty address: the same
// machine only.
var DefaultAddr = "127.0.0.1:" + strconv.Itoa(DefaultPort)

// ErrBroadcast: the destination is a broadcast, multicast or unspecified
// address and Options.AllowBroadcast is not set.
var ErrBroadcast = errors.New("ctlstream: broadcast or multicast destination refused (set AllowBroadcast to allow)")

// NewUDP returns a Sender that sends one datagram per message to addr
// ("host:port"). An empty addr means DefaultAddr; an address without a host
// (":port") means 127.0.0.1. Broadcast, multicast and unspecified addresses
// (0.0.0.0, ::) are refused with ErrBroadcast unless opt.AllowBroadcast is
// set, so guidance never spreads over a network by accident.
func NewUDP(addr string, opt Options) (*Sender, error) {
	if addr == "" {
		addr = DefaultAddr
	}
	host, port, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("ctlstream: address %q: %w", addr, err)
	}
	if host == "" {
		host = "127.0.0.1"
	}
	ua, err := net.ResolveUDPAddr("udp", net.JoinHostPort(host, port))
	if err != nil {
		return nil, fmt.Errorf("ctlstream: address %q: %w", addr, err)
	}
	if ua.Port == 0 {
		return nil, fmt.Errorf("ctlstream: address %q: port 0", addr)
	}
	if !opt.AllowBroadcast && isBroadcast(ua.IP) {
		return nil, fmt.Errorf("%w: %s", ErrBroadcast, ua)
	}
	conn, err := net.DialUDP("udp", nil, ua)
	if err != nil {
		return nil, fmt.Errorf("ctlstream: dial %s: %w", ua, err)
	}
	return NewWriter(conn, opt), nil
}

// isBroadcast reports whether ip reaches more than one receiver: the
// limited broadcast address, a multicast or unspecified address, or the
// directed broadcast address of a local IPv4 network.
func isBroadcast(ip net.IP) bool {
	if ip.IsMulticast() || ip.IsUnspecified() || ip.Equal(net.IPv4bcast) {
		return true
	}
	ip4 := ip.To4()
	if ip4 == nil {
		return false
	}
	addrs, err := net.InterfaceAddrs()
	if err != nil {
		return false
	}
	for _, a := range addrs {
		n, ok := a.(*net.IPNet)
		if !ok || n.IP.To4() == nil || len(n.Mask) == 0 {
			continue
		}
		mask := n.Mask
		if len(mask) == net.IPv6len {
			mask = mask[12:]
		}
		ones, bits := net.IPMask(mask).Size()
		if bits != 32 || ones >= 31 { // /31 and /32 have no broadcast address
			continue
		}
		b := make(net.IP, 4)
		base := n.IP.To4()
		for i := range b {
			b[i] = base[i] | ^mask[i]
		}
		if b.Equal(ip4) {
			return true
		}
	}
	return false
}
