package main

// This file is the catalogue of Go functions that appear in the generated
// stacks: the standard library, the module-cache dependencies and the
// greenhouse application itself. File names follow what a default (not
// -trimpath) Go build records: $GOROOT/src/… for the standard library,
// $GOMODCACHE/<module>@<version>/… for dependencies and the absolute module
// directory for the main module. Line numbers are plausible, not copied from
// a particular release.

const (
	// gorootSrc is $GOROOT/src of the build machine of the invented service.
	gorootSrc = "/usr/local/go/src/"
	// modCache is $GOMODCACHE ($GOPATH/pkg/mod) of the build machine.
	modCache = "/home/build/go/pkg/mod/"
	// appDir is the main module's directory on the build machine.
	appDir = "/home/build/greenhouse/"

	// appModule is the invented service's module path.
	appModule = "example.com/greenhouse"

	pgxDir        = modCache + "github.com/jackc/pgx/v5@v5.7.1/"
	otelhttpDir   = modCache + "go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp@v0.63.0/"
	websessionDir = modCache + "github.com/mossgate/websession@v1.3.0/"
)

// fnDef is one Go function: its symbol name as the runtime reports it,
// the file it is defined in and its first line.
type fnDef struct {
	name  string
	file  string
	start int64
}

// frame is one function activation on a stack: a function and the line
// executing in it (the call site when it has a callee below it).
type frame struct {
	fn   *fnDef
	line int64
	// inl marks a frame inlined into its caller (the previous frame in a
	// root-first stack); the pair ends up in one pprof Location.
	inl bool
}

// at returns a frame of f executing line.
func (f *fnDef) at(line int64) frame { return frame{fn: f, line: line} }

// inl returns a frame of f executing line, inlined into its caller.
func (f *fnDef) inl(line int64) frame { return frame{fn: f, line: line, inl: true} }

func stdFn(name, rel string, start int64) *fnDef {
	return &fnDef{name: name, file: gorootSrc + rel, start: start}
}

func pgxFn(name, rel string, start int64) *fnDef {
	return &fnDef{name: "github.com/jackc/pgx/v5" + name, file: pgxDir + rel, start: start}
}

func appFn(name, rel string, start int64) *fnDef {
	return &fnDef{name: name, file: appDir + rel, start: start}
}

// chain concatenates frame lists into a new root-first stack fragment.
func chain(parts ...[]frame) []frame {
	n := 0
	for _, p := range parts {
		n += len(p)
	}
	out := make([]frame, 0, n)
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}

// fr is shorthand for a literal fragment.
func fr(fs ...frame) []frame { return fs }

// Runtime and the parts of the standard library below every wait.
var (
	rtMain        = stdFn("runtime.main", "runtime/proc.go", 147)
	rtGopark      = stdFn("runtime.gopark", "runtime/proc.go", 424)
	rtSelectgo    = stdFn("runtime.selectgo", "runtime/select.go", 121)
	rtNetpollblk  = stdFn("runtime.netpollblock", "runtime/netpoll.go", 554)
	rtPollWait    = stdFn("internal/poll.runtime_pollWait", "runtime/netpoll.go", 336)
	rtMallocgc    = stdFn("runtime.mallocgc", "runtime/malloc.go", 1012)
	rtMallocSmall = stdFn("runtime.mallocgcSmallScanNoHeader", "runtime/malloc.go", 1254)
	rtGrowslice   = stdFn("runtime.growslice", "runtime/slice.go", 155)
	rtMemmove     = stdFn("runtime.memmove", "runtime/memmove_amd64.s", 33)
	rtMapassign   = stdFn("runtime.mapassign_faststr", "internal/runtime/maps/runtime_faststr_swiss.go", 263)
	rtSleep       = stdFn("time.Sleep", "runtime/time.go", 300)
	rtGCWorker    = stdFn("runtime.gcBgMarkWorker", "runtime/mgc.go", 1362)
	rtGCWorkerF2  = stdFn("runtime.gcBgMarkWorker.func2", "runtime/mgc.go", 1485)
	rtSystemstack = stdFn("runtime.systemstack", "runtime/asm_amd64.s", 479)
	rtGCDrain     = stdFn("runtime.gcDrain", "runtime/mgcmark.go", 1154)
	rtScanobject  = stdFn("runtime.scanobject", "runtime/mgcmark.go", 1394)
	rtFindObject  = stdFn("runtime.findObject", "runtime/mbitmap.go", 1247)
	rtBgsweep     = stdFn("runtime.bgsweep", "runtime/mgcsweep.go", 279)
	rtSweepone    = stdFn("runtime.sweepone", "runtime/mgcsweep.go", 359)

	pollFDRead    = stdFn("internal/poll.(*FD).Read", "internal/poll/fd_unix.go", 141)
	pollFDWrite   = stdFn("internal/poll.(*FD).Write", "internal/poll/fd_unix.go", 363)
	pollFDAccept  = stdFn("internal/poll.(*FD).Accept", "internal/poll/fd_unix.go", 598)
	pollWaitRead  = stdFn("internal/poll.(*pollDesc).waitRead", "internal/poll/fd_poll_runtime.go", 88)
	pollWait      = stdFn("internal/poll.(*pollDesc).wait", "internal/poll/fd_poll_runtime.go", 79)
	pollIgnoring  = stdFn("internal/poll.ignoringEINTRIO", "internal/poll/fd_unix.go", 736)
	netConnRead   = stdFn("net.(*conn).Read", "net/net.go", 187)
	netConnWrite  = stdFn("net.(*conn).Write", "net/net.go", 199)
	netFDRead     = stdFn("net.(*netFD).Read", "net/fd_posix.go", 67)
	netFDWrite    = stdFn("net.(*netFD).Write", "net/fd_posix.go", 95)
	netFDAccept   = stdFn("net.(*netFD).accept", "net/fd_unix.go", 171)
	netTCPAccept  = stdFn("net.(*TCPListener).Accept", "net/tcpsock.go", 375)
	netTCPAccept2 = stdFn("net.(*TCPListener).accept", "net/tcpsock_posix.go", 158)
	sysRead       = stdFn("syscall.Read", "syscall/syscall_unix.go", 182)
	sysWrite      = stdFn("syscall.Write", "syscall/syscall_unix.go", 206)
	sysRead2      = stdFn("syscall.read", "syscall/zsyscall_linux_amd64.go", 727)
	sysWrite2     = stdFn("syscall.write", "syscall/zsyscall_linux_amd64.go", 952)
	sysSyscall    = stdFn("syscall.Syscall", "syscall/syscall_linux.go", 71)
	sysRaw6       = stdFn("syscall.RawSyscall6", "syscall/syscall_linux.go", 60)
	sysLinux6     = stdFn("internal/runtime/syscall/linux.Syscall6", "internal/runtime/syscall/linux/asm_linux_amd64.s", 30)
	ioReadAtLeast = stdFn("io.ReadAtLeast", "io/io.go", 329)
	bufioPeek     = stdFn("bufio.(*Reader).Peek", "bufio/bufio.go", 139)
	bufioFill     = stdFn("bufio.(*Reader).fill", "bufio/bufio.go", 100)
	bufioReadSl   = stdFn("bufio.(*Reader).ReadSlice", "bufio/bufio.go", 363)
	bufioReadLine = stdFn("bufio.(*Reader).ReadLine", "bufio/bufio.go", 392)
	textprotoRL   = stdFn("net/textproto.(*Reader).readLineSlice", "net/textproto/reader.go", 56)
	textprotoRL0  = stdFn("net/textproto.(*Reader).ReadLine", "net/textproto/reader.go", 38)
	bytesReadFrom = stdFn("bytes.(*Buffer).ReadFrom", "bytes/buffer.go", 201)
	sortPdq       = stdFn("sort.pdqsort_func", "sort/zsortfunc.go", 61)
	sortInsertion = stdFn("sort.insertionSort_func", "sort/zsortfunc.go", 12)
	sortSlice     = stdFn("sort.Slice", "sort/slice.go", 22)
	mathRound     = stdFn("math.Round", "math/floor.go", 111)
	strconvAppend = stdFn("strconv.AppendInt", "strconv/itoa.go", 39)
	strconvFmtB   = stdFn("strconv.formatBits", "strconv/itoa.go", 101)
	fmtFprintf    = stdFn("fmt.Fprintf", "fmt/print.go", 222)
	fmtDoPrintf   = stdFn("fmt.(*pp).doPrintf", "fmt/print.go", 1023)
	fmtPrintArg   = stdFn("fmt.(*pp).printArg", "fmt/print.go", 700)
	reflectField  = stdFn("reflect.Value.Field", "reflect/value.go", 1279)
	reflectIface  = stdFn("reflect.valueInterface", "reflect/value.go", 1499)
	htmlExecute   = stdFn("html/template.(*Template).Execute", "html/template/template.go", 122)
	textExecute   = stdFn("text/template.(*Template).execute", "text/template/exec.go", 200)
	textWalk      = stdFn("text/template.(*state).walk", "text/template/exec.go", 262)
	textWalkRange = stdFn("text/template.(*state).walkRange", "text/template/exec.go", 349)
	textEvalPipe  = stdFn("text/template.(*state).evalPipeline", "text/template/exec.go", 452)
	textPrintVal  = stdFn("text/template.(*state).printValue", "text/template/exec.go", 1101)
	htmlEscaper   = stdFn("html/template.htmlEscaper", "html/template/escape.go", 64)
	htmlReplace   = stdFn("html/template.htmlReplacer", "html/template/html.go", 164)
	jsonMarshal   = stdFn("encoding/json.Marshal", "encoding/json/encode.go", 158)
	jsonEncode    = stdFn("encoding/json.(*encodeState).marshal", "encoding/json/encode.go", 294)
	jsonStructEnc = stdFn("encoding/json.structEncoder.encode", "encoding/json/encode.go", 715)
	jsonStringEnc = stdFn("encoding/json.appendString[go.shape.string]", "encoding/json/encode.go", 998)
	jsonDecode    = stdFn("encoding/json.(*Decoder).Decode", "encoding/json/stream.go", 49)
	jsonUnmarshal = stdFn("encoding/json.(*decodeState).unmarshal", "encoding/json/decode.go", 178)
	jsonObject    = stdFn("encoding/json.(*decodeState).object", "encoding/json/decode.go", 587)
	jsonLiteral   = stdFn("encoding/json.(*decodeState).literalStore", "encoding/json/decode.go", 863)
	tlsWrite      = stdFn("crypto/tls.(*Conn).Write", "crypto/tls/conn.go", 1179)
	tlsWriteRec   = stdFn("crypto/tls.(*Conn).writeRecordLocked", "crypto/tls/conn.go", 983)
	tlsEncrypt    = stdFn("crypto/tls.(*halfConn).encrypt", "crypto/tls/conn.go", 475)
	tlsGCMSeal    = stdFn("crypto/internal/fips140/aes/gcm.seal", "crypto/internal/fips140/aes/gcm/gcm_asm.go", 81)
	tlsRead       = stdFn("crypto/tls.(*Conn).Read", "crypto/tls/conn.go", 1364)
	tlsReadRecord = stdFn("crypto/tls.(*Conn).readRecord", "crypto/tls/conn.go", 606)
	tlsReadRCCS   = stdFn("crypto/tls.(*Conn).readRecordOrCCS", "crypto/tls/conn.go", 613)
	tlsReadUntil  = stdFn("crypto/tls.(*Conn).readFromUntil", "crypto/tls/conn.go", 797)
	tlsAtLeast    = stdFn("crypto/tls.(*atLeastReader).Read", "crypto/tls/conn.go", 776)
	pprofDo       = stdFn("runtime/pprof.Do", "runtime/pprof/runtime.go", 40)
)

// net/http server and client.
var (
	httpConnServe   = stdFn("net/http.(*conn).serve", "net/http/server.go", 1957)
	httpReadReq     = stdFn("net/http.(*conn).readRequest", "net/http/server.go", 1000)
	httpReadReq2    = stdFn("net/http.readRequest", "net/http/request.go", 1081)
	httpConnReader  = stdFn("net/http.(*connReader).Read", "net/http/server.go", 772)
	httpServerH     = stdFn("net/http.serverHandler.ServeHTTP", "net/http/server.go", 3285)
	httpHandlerFunc = stdFn("net/http.HandlerFunc.ServeHTTP", "net/http/server.go", 2293)
	httpMux         = stdFn("net/http.(*ServeMux).ServeHTTP", "net/http/server.go", 2744)
	httpListenServe = stdFn("net/http.(*Server).ListenAndServe", "net/http/server.go", 3356)
	httpServe       = stdFn("net/http.(*Server).Serve", "net/http/server.go", 3388)
	httpClientDo    = stdFn("net/http.(*Client).Do", "net/http/client.go", 588)
	httpClientDo2   = stdFn("net/http.(*Client).do", "net/http/client.go", 597)
	httpClientSend  = stdFn("net/http.(*Client).send", "net/http/client.go", 170)
	httpSend        = stdFn("net/http.send", "net/http/client.go", 204)
	httpNewRequest  = stdFn("net/http.NewRequestWithContext", "net/http/request.go", 883)
	httpHeaderClone = stdFn("net/http.Header.Clone", "net/http/header.go", 94)
	httpRoundTrip   = stdFn("net/http.(*Transport).RoundTrip", "net/http/roundtrip.go", 30)
	httpRoundTrip2  = stdFn("net/http.(*Transport).roundTrip", "net/http/transport.go", 566)
	httpGetConn     = stdFn("net/http.(*Transport).getConn", "net/http/transport.go", 1431)
	httpPCRoundTrip = stdFn("net/http.(*persistConn).roundTrip", "net/http/transport.go", 2692)
	httpPCReadLoop  = stdFn("net/http.(*persistConn).readLoop", "net/http/transport.go", 2251)
	httpPCWriteLoop = stdFn("net/http.(*persistConn).writeLoop", "net/http/transport.go", 2508)
	httpPCRead      = stdFn("net/http.(*persistConn).Read", "net/http/transport.go", 2111)
)

// database/sql.
var (
	sqlQueryRow    = stdFn("database/sql.(*DB).QueryRowContext", "database/sql/sql.go", 1955)
	sqlQuery       = stdFn("database/sql.(*DB).QueryContext", "database/sql/sql.go", 1758)
	sqlExec        = stdFn("database/sql.(*DB).ExecContext", "database/sql/sql.go", 1688)
	sqlRetry       = stdFn("database/sql.(*DB).retry", "database/sql/sql.go", 1562)
	sqlQueryF1     = stdFn("database/sql.(*DB).QueryContext.func1", "database/sql/sql.go", 1761)
	sqlExecF1      = stdFn("database/sql.(*DB).ExecContext.func1", "database/sql/sql.go", 1691)
	sqlQuery2      = stdFn("database/sql.(*DB).query", "database/sql/sql.go", 1778)
	sqlExec2       = stdFn("database/sql.(*DB).exec", "database/sql/sql.go", 1708)
	sqlConn        = stdFn("database/sql.(*DB).conn", "database/sql/sql.go", 1297)
	sqlQueryDC     = stdFn("database/sql.(*DB).queryDC", "database/sql/sql.go", 1795)
	sqlQueryDCF1   = stdFn("database/sql.(*DB).queryDC.func1", "database/sql/sql.go", 1812)
	sqlExecDC      = stdFn("database/sql.(*DB).execDC", "database/sql/sql.go", 1724)
	sqlExecDCF2    = stdFn("database/sql.(*DB).execDC.func2", "database/sql/sql.go", 1740)
	sqlWithLock    = stdFn("database/sql.withLock", "database/sql/sql.go", 3571)
	sqlCtxQuery    = stdFn("database/sql.ctxDriverQuery", "database/sql/ctxutil.go", 46)
	sqlCtxExec     = stdFn("database/sql.ctxDriverExec", "database/sql/ctxutil.go", 31)
	sqlRowsNext    = stdFn("database/sql.(*Rows).Next", "database/sql/sql.go", 2992)
	sqlRowsNextF1  = stdFn("database/sql.(*Rows).Next.func1", "database/sql/sql.go", 2999)
	sqlRowsNextL   = stdFn("database/sql.(*Rows).nextLocked", "database/sql/sql.go", 3013)
	sqlRowsScan    = stdFn("database/sql.(*Rows).Scan", "database/sql/sql.go", 3335)
	sqlRowScan     = stdFn("database/sql.(*Row).Scan", "database/sql/sql.go", 3437)
	sqlConvert     = stdFn("database/sql.convertAssignRows", "database/sql/convert.go", 219)
	sqlOpenerWrap  = stdFn("database/sql.OpenDB.gowrap1", "database/sql/sql.go", 841)
	sqlOpener      = stdFn("database/sql.(*DB).connectionOpener", "database/sql/sql.go", 1246)
	pgxStdQuery    = pgxFn("/stdlib.(*Conn).QueryContext", "stdlib/sql.go", 436)
	pgxStdExec     = pgxFn("/stdlib.(*Conn).ExecContext", "stdlib/sql.go", 415)
	pgxStdNext     = pgxFn("/stdlib.(*Rows).Next", "stdlib/sql.go", 751)
	pgxQuery       = pgxFn(".(*Conn).Query", "conn.go", 752)
	pgxExec        = pgxFn(".(*Conn).Exec", "conn.go", 493)
	pgxExec2       = pgxFn(".(*Conn).exec", "conn.go", 507)
	pgxExecParams  = pgxFn(".(*Conn).execParams", "conn.go", 606)
	pgxRowsNext    = pgxFn(".(*baseRows).Next", "rows.go", 206)
	pgconnExecPar  = pgxFn("/pgconn.(*PgConn).ExecParams", "pgconn/pgconn.go", 1086)
	pgconnExecPre  = pgxFn("/pgconn.(*PgConn).execExtendedPrefix", "pgconn/pgconn.go", 1136)
	pgconnExecSuf  = pgxFn("/pgconn.(*PgConn).execExtendedSuffix", "pgconn/pgconn.go", 1179)
	pgconnFlush    = pgxFn("/pgconn.(*PgConn).flushWithPotentialWriteReadDeadlock", "pgconn/pgconn.go", 1792)
	pgconnRRRead   = pgxFn("/pgconn.(*ResultReader).Read", "pgconn/pgconn.go", 1591)
	pgconnNextRow  = pgxFn("/pgconn.(*ResultReader).NextRow", "pgconn/pgconn.go", 1626)
	pgconnRUntil   = pgxFn("/pgconn.(*ResultReader).readUntilRowDescription", "pgconn/pgconn.go", 1709)
	pgconnRRRecv   = pgxFn("/pgconn.(*ResultReader).receiveMessage", "pgconn/pgconn.go", 1727)
	pgconnRecv     = pgxFn("/pgconn.(*PgConn).receiveMessage", "pgconn/pgconn.go", 546)
	pgconnPeek     = pgxFn("/pgconn.(*PgConn).peekMessage", "pgconn/pgconn.go", 504)
	pgprotoRecv    = pgxFn("/pgproto3.(*Frontend).Receive", "pgproto3/frontend.go", 293)
	pgprotoChunk   = pgxFn("/pgproto3.(*chunkReader).Next", "pgproto3/chunkreader.go", 49)
	pgprotoBind    = pgxFn("/pgproto3.(*Bind).Encode", "pgproto3/bind.go", 111)
	pgprotoDataRow = pgxFn("/pgproto3.(*DataRow).Decode", "pgproto3/data_row.go", 26)
	pgBGRead       = pgxFn("/pgconn/internal/bgreader.(*BGReader).Read", "pgconn/internal/bgreader/bgreader.go", 100)
	pgtypeScan     = pgxFn("/pgtype.scanPlanTextAnyToString.Scan", "pgtype/text.go", 167)
)

// Third-party middleware: HTTP server tracing, and the (invented) session
// library that queries the database before any application code runs.
var (
	otelNewMW      = &fnDef{"go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp.NewMiddleware.func1.1", otelhttpDir + "handler.go", 54}
	otelServe      = &fnDef{"go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp.(*middleware).serveHTTP", otelhttpDir + "handler.go", 91}
	sessMiddleware = &fnDef{"github.com/mossgate/websession.(*Manager).Middleware.func1", websessionDir + "middleware.go", 41}
	sessLoad       = &fnDef{"github.com/mossgate/websession.(*Manager).load", websessionDir + "manager.go", 79}
	sessGet        = &fnDef{"github.com/mossgate/websession.(*PGStore).Get", websessionDir + "store_pg.go", 37}
	sessDecode     = &fnDef{"github.com/mossgate/websession.decodeValues", websessionDir + "codec.go", 22}
)

// The greenhouse application.
var (
	appMain          = appFn("main.main", "main.go", 18)
	appRun           = appFn("main.run", "main.go", 27)
	appWorkersWrap   = appFn("main.startWorkers.gowrap1", "main.go", 61)
	appInstrument    = appFn("main.(*server).instrument.func1", "server.go", 57)
	appInstrumentF11 = appFn("main.(*server).instrument.func1.1", "server.go", 61)
	appCatalogH      = appFn("main.(*server).handleCatalog", "handlers.go", 27)
	appPlantsH       = appFn("main.(*server).handlePlants", "handlers.go", 54)
	appCheckoutH     = appFn("main.(*server).handleCheckout", "handlers.go", 79)
	appReportsH      = appFn("main.(*server).handleMonthlyReport", "handlers.go", 108)
	appRender        = appFn("main.(*server).render", "render.go", 19)
	appWriteJSON     = appFn("main.writeJSON", "render.go", 41)
	catList          = appFn(appModule+"/catalog.(*Service).List", "catalog/service.go", 38)
	catVarietyByID   = appFn(appModule+"/catalog.(*Repo).VarietyByID", "catalog/repo.go", 69)
	catPlantByID     = appFn(appModule+"/catalog.(*Repo).PlantByID", "catalog/repo.go", 86)
	catTreeBuild     = appFn(appModule+"/catalog.(*Tree).Build", "catalog/tree.go", 21)
	catTreeExpand    = appFn(appModule+"/catalog.(*Tree).expand", "catalog/tree.go", 31)
	priceApply       = appFn(appModule+"/pricing.ApplyDiscounts", "pricing/discount.go", 44)
	priceApplyF1     = appFn(appModule+"/pricing.ApplyDiscounts.func1", "pricing/discount.go", 52)
	priceMatches     = appFn(appModule+"/pricing.(*Rule).Matches", "pricing/rule.go", 30)
	priceRound       = appFn(appModule+"/pricing.roundCents", "pricing/money.go", 12)
	coPlace          = appFn(appModule+"/checkout.(*Service).Place", "checkout/service.go", 33)
	coLoadCart       = appFn(appModule+"/checkout.(*Store).LoadCart", "checkout/store.go", 25)
	coSaveOrder      = appFn(appModule+"/checkout.(*Store).SaveOrder", "checkout/store.go", 52)
	coQuoteEach      = appFn(appModule+"/checkout.(*Quoter).QuoteEach", "checkout/quote.go", 47)
	repBuild         = appFn(appModule+"/reports.(*Monthly).Build", "reports/monthly.go", 58)
	invRun           = appFn(appModule+"/inventory.(*Syncer).Run", "inventory/sync.go", 34)
)

// Wait and CPU fragments below the boundary calls. Each is root-first and
// starts with the first frame below the application (or library) frame
// that makes the call. All tables in this file are read-only.

// netReadWait is a goroutine parked reading a TCP socket.
var netReadWait = fr(
	netConnRead.at(194), netFDRead.at(68), pollFDRead.at(165), pollWaitRead.inl(89),
	pollWait.at(84), rtPollWait.at(351), rtNetpollblk.at(575), rtGopark.at(460),
)

// netReadSyscall is a goroutine on CPU reading a TCP socket.
var netReadSyscall = fr(
	netConnRead.at(194), netFDRead.at(68), pollFDRead.at(154), pollIgnoring.inl(745),
	sysRead.inl(183), sysRead2.at(736), sysSyscall.at(86), sysRaw6.at(60), sysLinux6.at(36),
)

// netWriteSyscall is a goroutine on CPU writing a TCP socket.
var netWriteSyscall = fr(
	netConnWrite.at(203), netFDWrite.at(96), pollFDWrite.at(380), pollIgnoring.inl(745),
	sysWrite.inl(207), sysWrite2.at(956), sysSyscall.at(86), sysRaw6.at(60), sysLinux6.at(36),
)

// pgRecv is pgx waiting for the server's next message, from a ResultReader.
var pgRecv = fr(
	pgconnRRRecv.at(1729), pgconnRecv.at(548), pgconnPeek.at(522), pgprotoRecv.at(302),
	pgprotoChunk.at(80), ioReadAtLeast.at(335), pgBGRead.at(109),
)

// Entry fragments into database/sql: each ends at the driver call.
var (
	sqlQueryEntry = fr(
		sqlQuery.at(1764), sqlRetry.at(1568), sqlQueryF1.at(1762), sqlQuery2.at(1788),
		sqlQueryDC.at(1812), sqlWithLock.at(3576), sqlQueryDCF1.at(1813), sqlCtxQuery.at(48),
		pgxStdQuery.at(477), pgxQuery.at(829),
	)
	sqlQueryPoolWait = fr(
		sqlQuery.at(1764), sqlRetry.at(1568), sqlQueryF1.at(1762), sqlQuery2.at(1783),
		sqlConn.at(1344), rtSelectgo.at(351), rtGopark.at(460),
	)
	sqlExecEntry = fr(
		sqlExec.at(1691), sqlRetry.at(1568), sqlExecF1.at(1692), sqlExec2.at(1718),
		sqlExecDC.at(1740), sqlWithLock.at(3576), sqlExecDCF2.at(1741), sqlCtxExec.at(33),
		pgxStdExec.at(425), pgxExec.at(498), pgxExec2.at(556), pgxExecParams.at(620),
	)
	sqlNextEntry = fr(
		sqlRowsNext.at(2999), sqlWithLock.at(3576), sqlRowsNextF1.at(3000), sqlRowsNextL.at(3024),
		pgxStdNext.at(790), pgxRowsNext.at(237), pgconnNextRow.at(1632),
	)
)

// dbQueryWait lists where a goroutine blocked in a query sits: awaiting the
// result, or a free connection from the pool. row selects QueryRowContext.
func dbQueryWait(row bool) [][]frame {
	pre := []frame(nil)
	if row {
		pre = fr(sqlQueryRow.at(1959))
	}
	return [][]frame{
		chain(pre, sqlQueryEntry, fr(pgconnExecPar.at(1101), pgconnExecSuf.at(1199), pgconnRUntil.at(1711)), pgRecv, netReadWait),
		chain(pre, sqlQueryPoolWait),
	}
}

// dbQueryCPU lists fragments of a query on CPU: encoding the statement,
// writing it to the socket, reading the reply.
func dbQueryCPU(row bool) [][]frame {
	pre := []frame(nil)
	if row {
		pre = fr(sqlQueryRow.at(1959))
	}
	exec := chain(pre, sqlQueryEntry)
	return [][]frame{
		chain(exec, fr(pgconnExecPar.at(1095), pgconnExecPre.at(1160), pgprotoBind.at(140), rtGrowslice.at(272), rtMallocgc.at(1096))),
		chain(exec, fr(pgconnExecPar.at(1098), pgconnFlush.at(1803)), netWriteSyscall),
		chain(exec, fr(pgconnExecPar.at(1101), pgconnExecSuf.at(1199), pgconnRUntil.at(1711)), pgRecv, netReadSyscall),
	}
}

var (
	dbExecWait = [][]frame{
		chain(sqlExecEntry, fr(pgconnRRRead.at(1596), pgconnNextRow.at(1632)), pgRecv, netReadWait),
	}
	dbExecCPU = [][]frame{
		chain(sqlExecEntry, fr(pgconnExecPar.at(1095), pgconnExecPre.at(1160), pgprotoBind.at(140))),
		chain(sqlExecEntry, fr(pgconnExecPar.at(1098), pgconnFlush.at(1803)), netWriteSyscall),
	}
	dbNextWait = [][]frame{chain(sqlNextEntry, pgRecv, netReadWait)}
	dbNextCPU  = [][]frame{
		chain(sqlNextEntry, fr(pgconnRRRecv.at(1733), pgprotoDataRow.at(41))),
		chain(sqlNextEntry, pgRecv, netReadSyscall),
	}
	dbScanCPU = [][]frame{
		fr(sqlRowsScan.at(3371), sqlConvert.at(240), pgtypeScan.at(171), rtMallocgc.at(1096)),
		fr(sqlRowsScan.at(3371), sqlConvert.at(321), strconvAppend.at(41)),
	}
)

// HTTP client fragments, from net/http.(*Client).Do down.
var (
	httpDoEntry = fr(httpClientDo.at(590), httpClientDo2.at(725), httpClientSend.at(177), httpSend.at(259), httpRoundTrip.at(33))
	httpWait    = [][]frame{
		chain(httpDoEntry, fr(httpRoundTrip2.at(667), httpPCRoundTrip.at(2790), rtSelectgo.at(351), rtGopark.at(460))),
		chain(httpDoEntry, fr(httpRoundTrip2.at(619), httpGetConn.at(1513), rtSelectgo.at(351), rtGopark.at(460))),
	}
	httpCPU = [][]frame{
		chain(httpDoEntry, fr(httpRoundTrip2.at(603), httpHeaderClone.at(102), rtMallocgc.at(1096))),
		fr(httpClientDo.at(590), httpClientDo2.at(665), httpNewRequest.at(912), rtMallocgc.at(1096)),
	}
)

// Server root: the request goroutine from net/http down to the session
// middleware, and from there to the application's handler.
var (
	serverRoot = fr(
		httpConnServe.at(2102), httpServerH.at(3301), httpHandlerFunc.at(2294),
		otelNewMW.at(55), otelServe.at(179), httpHandlerFunc.at(2294),
	)
	// toHandler runs from the session middleware to the route handler
	// (the frames between sessMiddleware and a handle* method); the
	// application sets the route label in instrument.func1 via
	// runtime/pprof.Do.
	toHandler = fr(
		httpMux.at(2763), httpHandlerFunc.at(2294), appInstrument.at(63), pprofDo.at(51),
		appInstrumentF11.at(64),
	)
	// renderCPU is html/template executing a page.
	renderCPU = [][]frame{
		fr(htmlExecute.at(127), textExecute.at(219), textWalk.at(285), textWalkRange.at(381), textWalk.at(268), textEvalPipe.at(483), textPrintVal.at(1114), htmlEscaper.at(70), htmlReplace.at(180)),
		fr(htmlExecute.at(127), textExecute.at(219), textWalk.at(285), textWalkRange.at(381), textWalk.at(268), textEvalPipe.at(471), reflectField.at(1290)),
		fr(htmlExecute.at(127), textExecute.at(219), textWalk.at(285), textWalk.at(272), fmtFprintf.at(225), fmtDoPrintf.at(1075), fmtPrintArg.at(758), strconvFmtB.at(140)),
	}
	jsonEncodeCPU = [][]frame{
		fr(jsonMarshal.at(161), jsonEncode.at(298), jsonStructEnc.at(745), jsonStringEnc.at(1010)),
		fr(jsonMarshal.at(161), jsonEncode.at(298), jsonStructEnc.at(745), reflectField.at(1290)),
	}
	jsonDecodeCPU = [][]frame{
		fr(jsonDecode.at(74), jsonUnmarshal.at(183), jsonObject.at(697), jsonLiteral.at(958)),
		fr(jsonDecode.at(74), jsonUnmarshal.at(183), jsonObject.at(640), rtMapassign.at(287)),
	}
)

// The pure CPU work of pricing.ApplyDiscounts, below its own frame. The
// rule matcher and the rounding helper are inlined into it.
var applyDiscountsCPU = []tail{
	{line: 58, w: 40, frames: fr(priceMatches.inl(35))},
	{line: 63, w: 20, frames: fr(priceRound.inl(14), mathRound.at(118))},
	{line: 49, w: 20, frames: fr(sortSlice.at(27), sortPdq.at(70), sortInsertion.at(15), priceApplyF1.at(53))},
	{line: 71, w: 12, frames: fr(rtGrowslice.at(272), rtMallocgc.at(1096), rtMallocSmall.at(1283))},
	{line: 66, w: 8, frames: nil},
}

// idleGoroutine is a goroutine outside any request, with how many of it
// a snapshot usually holds.
type idleGoroutine struct {
	stack    []frame
	min, max int
}

// idleGoroutines are the server's long-lived goroutines: the accept loop,
// keep-alive connections waiting for their next request, the database
// pool's opener, outbound keep-alive connections and an inventory syncer
// sleeping between runs (application code with nothing below it).
var idleGoroutines = []idleGoroutine{
	{stack: chain(fr(rtMain.at(283), appMain.at(22), appRun.at(49), httpListenServe.at(3375), httpServe.at(3424),
		netTCPAccept.at(380), netTCPAccept2.at(159), netFDAccept.at(172), pollFDAccept.at(620), pollWaitRead.inl(89),
		pollWait.at(84), rtPollWait.at(351), rtNetpollblk.at(575), rtGopark.at(460))), min: 1, max: 1},
	{stack: chain(fr(httpConnServe.at(2062), httpReadReq.at(1025), httpReadReq2.at(1100), textprotoRL0.at(39),
		textprotoRL.at(61), bufioReadLine.at(397), bufioReadSl.at(376), bufioFill.at(113), httpConnReader.at(795)), netReadWait), min: 4, max: 14},
	{stack: fr(sqlOpenerWrap.at(843), sqlOpener.at(1253), rtSelectgo.at(351), rtGopark.at(460)), min: 1, max: 1},
	{stack: chain(fr(httpPCReadLoop.at(2326), bufioPeek.at(152), bufioFill.at(113), httpPCRead.at(2125),
		tlsRead.at(1395), tlsReadRecord.inl(609), tlsReadRCCS.at(629), tlsReadUntil.at(809), bytesReadFrom.at(211),
		tlsAtLeast.at(787)), netReadWait), min: 2, max: 5},
	{stack: fr(httpPCWriteLoop.at(2519), rtSelectgo.at(351), rtGopark.at(460)), min: 2, max: 5},
	{stack: fr(appWorkersWrap.at(62), invRun.at(41), rtSleep.at(338), rtGopark.at(460)), min: 1, max: 1},
}

// gcCPU are the garbage collector's own stacks in a CPU profile; they carry
// no labels and no application frame.
var gcCPU = []tail{
	{w: 55, frames: fr(rtGCWorker.at(1423), rtSystemstack.at(514), rtGCWorkerF2.at(1508), rtGCDrain.at(1212), rtScanobject.at(1446), rtFindObject.at(1266))},
	{w: 30, frames: fr(rtGCWorker.at(1423), rtSystemstack.at(514), rtGCWorkerF2.at(1508), rtGCDrain.at(1212), rtScanobject.at(1418))},
	{w: 15, frames: fr(rtBgsweep.at(301), rtSweepone.at(392))},
}

// cpuLeaves are small standard-library leaves for the large profile.
var cpuLeaves = [][]frame{
	fr(rtMallocgc.at(1096), rtMallocSmall.at(1283)),
	fr(rtGrowslice.at(272), rtMallocgc.at(1096)),
	fr(rtMemmove.at(180)),
	fr(rtMapassign.at(287)),
	fr(strconvAppend.at(41), strconvFmtB.at(140)),
	fr(sortSlice.at(27), sortPdq.at(70), sortInsertion.at(15)),
	fr(fmtFprintf.at(225), fmtDoPrintf.at(1075), fmtPrintArg.at(758)),
	fr(reflectField.at(1290)),
	fr(reflectIface.at(1512), rtMallocgc.at(1096)),
	fr(mathRound.at(118)),
}
