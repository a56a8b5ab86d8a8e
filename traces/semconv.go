package traces

import (
	"net"
	"net/url"
	"strconv"
	"strings"
)

// This file maps span attributes to frames and calls, following the
// OpenTelemetry semantic conventions (v1.44.0), current and older names.

// The span attributes culprit reads (OpenTelemetry semantic conventions,
// current and older names).
const (
	aCodeFunctionName = iota
	aCodeNamespace
	aCodeFunction
	aCodeFilePath
	aCodeFilepath
	aCodeLineNumber
	aCodeLineno
	aHTTPRoute
	aHTTPRequestMethod
	aHTTPRequestMethodOriginal
	aHTTPMethod
	aURLFull
	aHTTPURL
	aMessagingDestinationName
	aMessagingDestination
	aMessagingSystem
	aMessagingOperationName
	aMessagingOperation
	aDBSystemName
	aDBSystem
	aDBQueryText
	aDBStatement
	aDBQuerySummary
	aDBOperationName
	aDBOperation
	aDBOperationBatchSize
	aRPCSystemName
	aRPCSystem
	aRPCMethod
	aRPCService
	aServerAddress
	aServerPort
	aNetPeerName
	aNetPeerPort
	aServicePeerName
	aPeerService
	numAttrs
)

// attrSet holds a span's attributes that culprit reads, by index; nil
// when absent. The values point into the decoded line.
type attrSet [numAttrs]*jsonAnyValue

// attrIndex returns the attrSet index of key, or -1.
func attrIndex(key string) int {
	switch key {
	case "code.function.name":
		return aCodeFunctionName
	case "code.namespace":
		return aCodeNamespace
	case "code.function":
		return aCodeFunction
	case "code.file.path":
		return aCodeFilePath
	case "code.filepath":
		return aCodeFilepath
	case "code.line.number":
		return aCodeLineNumber
	case "code.lineno":
		return aCodeLineno
	case "http.route":
		return aHTTPRoute
	case "http.request.method":
		return aHTTPRequestMethod
	case "http.request.method_original":
		return aHTTPRequestMethodOriginal
	case "http.method":
		return aHTTPMethod
	case "url.full":
		return aURLFull
	case "http.url":
		return aHTTPURL
	case "messaging.destination.name":
		return aMessagingDestinationName
	case "messaging.destination":
		return aMessagingDestination
	case "messaging.system":
		return aMessagingSystem
	case "messaging.operation.name":
		return aMessagingOperationName
	case "messaging.operation":
		return aMessagingOperation
	case "db.system.name":
		return aDBSystemName
	case "db.system":
		return aDBSystem
	case "db.query.text":
		return aDBQueryText
	case "db.statement":
		return aDBStatement
	case "db.query.summary":
		return aDBQuerySummary
	case "db.operation.name":
		return aDBOperationName
	case "db.operation":
		return aDBOperation
	case "db.operation.batch.size":
		return aDBOperationBatchSize
	case "rpc.system.name":
		return aRPCSystemName
	case "rpc.system":
		return aRPCSystem
	case "rpc.method":
		return aRPCMethod
	case "rpc.service":
		return aRPCService
	case "server.address":
		return aServerAddress
	case "server.port":
		return aServerPort
	case "net.peer.name":
		return aNetPeerName
	case "net.peer.port":
		return aNetPeerPort
	case "service.peer.name":
		return aServicePeerName
	case "peer.service":
		return aPeerService
	}
	return -1
}

// str returns the first of the attributes named by idx that has a
// non-empty text value.
func (a *attrSet) str(idx ...int) string {
	for _, i := range idx {
		if v := a[i]; v != nil {
			if s := v.text(); s != "" {
				return s
			}
		}
	}
	return ""
}

// int returns the first of the attributes named by idx that holds an integer.
func (a *attrSet) int(idx ...int) (int64, bool) {
	for _, i := range idx {
		if v := a[i]; v != nil {
			if n, ok := v.integer(); ok {
				return n, true
			}
		}
	}
	return 0, false
}

func (a *attrSet) has(idx ...int) bool {
	for _, i := range idx {
		if a[i] != nil {
			return true
		}
	}
	return false
}

// spanDetails derives a span's frame, its call details (zero unless it is
// a client or producer span of a known protocol) and its http.route.
// scope is the instrumentation scope's name. A database span of
// unspecified (or unknown) kind is taken as a CLIENT span: the frame's
// SpanKind then differs from kind, which the caller reports.
func spanDetails(kind SpanKind, name, service, scope string, a *attrSet, m *memo) (Frame, Call, string) {
	if kind == SpanKindUnspecified && a.str(aDBSystemName, aDBSystem) != "" {
		kind = SpanKindClient
	}
	f := Frame{SpanKind: kind, Service: service, Scope: scope, Span: true}
	route := a.str(aHTTPRoute)

	// The most code-like name available.
	switch {
	case a.str(aCodeFunctionName) != "":
		// Fully qualified since semantic conventions v1.31.0.
		f.Function = a.str(aCodeFunctionName)
	case a.str(aCodeFunction) != "":
		f.Function = a.str(aCodeFunction)
		if ns := a.str(aCodeNamespace); ns != "" {
			f.Function = ns + "." + f.Function
		}
	case kind == SpanKindServer || kind == SpanKindConsumer:
		if route != "" {
			f.Function = route
			if method := httpMethod(a); method != "" {
				if method != m.method || route != m.route {
					m.method, m.route, m.function = method, route, method+" "+route
				}
				f.Function = m.function
			}
		} else {
			f.Function = a.str(aMessagingDestinationName, aMessagingDestination)
		}
	}
	if f.Function == "" {
		f.Function = name
	}
	if f.Function == "" {
		f.Function = "(unnamed span)"
	}
	f.File = a.str(aCodeFilePath, aCodeFilepath)
	f.Code = f.File != "" || a.str(aCodeFunctionName, aCodeFunction) != ""
	if l, ok := a.int(aCodeLineNumber, aCodeLineno); ok && l > 0 {
		f.Line = l
	}

	if kind != SpanKindClient && kind != SpanKindProducer {
		return f, Call{}, route
	}
	var call Call
	switch {
	case a.str(aDBSystemName, aDBSystem) != "":
		f.Protocol = ProtocolDatabase
		f.System = dbSystemName(a.str(aDBSystemName, aDBSystem))
		call.Statement = a.str(aDBQueryText, aDBStatement)
		call.Summary = a.str(aDBQuerySummary)
		call.Operation = a.str(aDBOperationName, aDBOperation)
		if n, ok := a.int(aDBOperationBatchSize); ok && n > 1 {
			call.Batch = true
		}
		call.Connection = call.Statement == "" && call.Summary == "" &&
			(call.Operation == "" || isConnectionName(call.Operation)) && isConnectionName(name)
	case a.str(aRPCSystemName, aRPCSystem) != "":
		f.Protocol = ProtocolRPC
		f.System = rpcSystemName(a.str(aRPCSystemName, aRPCSystem))
		call.Operation = a.str(aRPCMethod)
		if svc := a.str(aRPCService); svc != "" && call.Operation != "" && !strings.Contains(call.Operation, "/") {
			call.Operation = svc + "/" + call.Operation
		}
	case a.str(aMessagingSystem) != "":
		f.Protocol = ProtocolMessaging
		f.System = a.str(aMessagingSystem)
		call.Operation = a.str(aMessagingOperationName, aMessagingOperation)
	case a.has(aHTTPRequestMethod, aHTTPMethod, aURLFull, aHTTPURL):
		f.Protocol = ProtocolHTTP
		f.System = "http"
		call.Operation = httpMethod(a)
	default:
		return f, Call{}, route
	}
	call.System = f.System
	call.Peer = peer(a, m)
	return f, call, route
}

// isConnectionName reports whether a database span's name (or operation)
// says that it acquires or opens a connection rather than running a
// statement: one of its words, split at anything but letters and digits,
// is connect, connection, acquire, checkout or getconnection, as in
// node-postgres's "pg-pool.connect" and "pg.connect", or pgx tracers'
// "pool.acquire" and "connect".
func isConnectionName(name string) bool {
	for len(name) > 0 {
		i := 0
		for i < len(name) && !isWordByte(name[i]) {
			i++
		}
		j := i
		for j < len(name) && isWordByte(name[j]) {
			j++
		}
		switch w := name[i:j]; {
		case strings.EqualFold(w, "connect"), strings.EqualFold(w, "connection"), strings.EqualFold(w, "acquire"),
			strings.EqualFold(w, "checkout"), strings.EqualFold(w, "getconnection"):
			return true
		}
		name = name[j:]
	}
	return false
}

func isWordByte(c byte) bool {
	return 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || '0' <= c && c <= '9'
}

// httpMethod returns the request's HTTP method; for "_OTHER" the original
// method when it was recorded.
func httpMethod(a *attrSet) string {
	m := a.str(aHTTPRequestMethod, aHTTPMethod)
	if m == "_OTHER" {
		if o := a.str(aHTTPRequestMethodOriginal); o != "" {
			return o
		}
	}
	return m
}

// peer returns the called peer: server.address[:server.port], else
// net.peer.name[:net.peer.port], else service.peer.name or peer.service,
// else the host of url.full or http.url.
func peer(a *attrSet, m *memo) string {
	if h := a.str(aServerAddress); h != "" {
		return hostPort(h, a, aServerPort, m)
	}
	if h := a.str(aNetPeerName); h != "" {
		return hostPort(h, a, aNetPeerPort, m)
	}
	if s := a.str(aServicePeerName, aPeerService); s != "" {
		return s
	}
	if u := a.str(aURLFull, aHTTPURL); u != "" {
		if u != m.url {
			m.url, m.urlHost = u, ""
			if p, err := url.Parse(u); err == nil {
				m.urlHost = p.Host
			}
		}
		return m.urlHost
	}
	return ""
}

func hostPort(host string, a *attrSet, port int, m *memo) string {
	p, ok := a.int(port)
	if !ok || p <= 0 {
		return host
	}
	for _, e := range m.peers {
		if e.port == p && e.host == host {
			return e.hostPort
		}
	}
	e := &m.peers[m.nextPeer%len(m.peers)]
	m.nextPeer++
	*e = peerMemo{host, p, net.JoinHostPort(host, strconv.FormatInt(p, 10))}
	return e.hostPort
}

// memo keeps the last strings that spanDetails made, so that the many
// spans of one call site do not each allocate them again. A job's spans
// call a few peers in turn (the database, a remote service): the last
// four host:port strings are kept.
type memo struct {
	peers    [4]peerMemo
	nextPeer int
	url      string
	urlHost  string
	method   string
	route    string
	function string
}

// peerMemo is a host, a port and their host:port.
type peerMemo struct {
	host     string
	port     int64
	hostPort string
}

// dbSystemName maps db.system values renamed by semantic conventions
// v1.30.0+ to their db.system.name form; others are returned unchanged.
func dbSystemName(s string) string {
	switch s {
	case "mssql":
		return "microsoft.sql_server"
	case "oracle":
		return "oracle.db"
	case "db2":
		return "ibm.db2"
	case "dynamodb":
		return "aws.dynamodb"
	case "cosmosdb":
		return "azure.cosmosdb"
	case "spanner":
		return "gcp.spanner"
	case "redshift":
		return "aws.redshift"
	case "hanadb":
		return "sap.hana"
	case "maxdb":
		return "sap.maxdb"
	case "h2":
		return "h2database"
	case "firebird":
		return "firebirdsql"
	case "informix":
		return "ibm.informix"
	case "ingres":
		return "actian.ingres"
	case "netezza":
		return "ibm.netezza"
	case "adabas":
		return "softwareag.adabas"
	case "intersystems_cache":
		return "intersystems.cache"
	}
	return s
}

// rpcSystemName maps renamed rpc.system values to their rpc.system.name form.
func rpcSystemName(s string) string {
	switch s {
	case "apache_dubbo":
		return "dubbo"
	case "connect_rpc":
		return "connectrpc"
	}
	return s
}
