package attribute

import (
	"errors"
	"strings"
	"testing"

	"github.com/culprithq/culprit/traces"
)

// One table per rule family: each row is a frame a real stack of that
// platform carries (names as the libraries define them) and its class.
func TestBuiltinRules(t *testing.T) {
	families := map[string][]struct {
		frame  traces.Frame
		class  Class
		system string
	}{
		"go": {
			{traces.Frame{Function: "database/sql.(*DB).QueryContext"}, Database, "sql"},
			{traces.Frame{Function: "github.com/jackc/pgx/v5/pgconn.(*PgConn).Exec"}, Database, "postgresql"},
			{traces.Frame{Function: "github.com/lib/pq.(*conn).query"}, Database, "postgresql"},
			{traces.Frame{Function: "github.com/go-sql-driver/mysql.(*mysqlConn).readPacket"}, Database, "mysql"},
			{traces.Frame{Function: "modernc.org/sqlite.(*conn).query"}, Database, "sqlite"},
			{traces.Frame{Function: "github.com/mattn/go-sqlite3.(*SQLiteConn).query"}, Database, "sqlite"},
			{traces.Frame{Function: "github.com/redis/go-redis/v9.(*baseClient).process"}, Database, "redis"},
			{traces.Frame{Function: "go.mongodb.org/mongo-driver/mongo.(*Collection).Find"}, Database, "mongodb"},
			{traces.Frame{Function: "google.golang.org/grpc.(*ClientConn).Invoke"}, Network, "grpc"},
			{traces.Frame{Function: "net/http.(*Client).Do"}, Network, "http"},
			{traces.Frame{Function: "net/http.(*Transport).roundTrip"}, Network, "http"},
			{traces.Frame{Function: "github.com/aws/aws-sdk-go-v2/service/s3.(*Client).GetObject"}, Network, "aws"},
			{traces.Frame{Function: "github.com/aws/aws-sdk-go-v2/service/dynamodb.(*Client).GetItem"}, Database, "aws.dynamodb"},
			{traces.Frame{Function: "cloud.google.com/go/storage.(*Reader).Read"}, Network, "gcp"},
			{traces.Frame{Function: "net/http.(*conn).serve"}, Entry, ""},
			{traces.Frame{Function: "net/http.HandlerFunc.ServeHTTP"}, Entry, ""},
			{traces.Frame{Function: "google.golang.org/grpc.(*Server).processUnaryRPC"}, Entry, ""},
			{traces.Frame{Function: "runtime.main"}, Entry, ""},
			{traces.Frame{Function: "net/http.(*Server).Serve"}, Library, ""},
		},
		"jvm": {
			{traces.Frame{Function: "org.postgresql.jdbc.PgPreparedStatement.executeQuery"}, Database, "postgresql"},
			{traces.Frame{Function: "com.mysql.cj.jdbc.ClientPreparedStatement.executeQuery"}, Database, "mysql"},
			{traces.Frame{Function: "com.zaxxer.hikari.pool.HikariProxyPreparedStatement.executeQuery"}, Database, "sql"},
			{traces.Frame{Function: "org.hibernate.loader.Loader.doQuery"}, Database, "sql"},
			{traces.Frame{Function: "redis.clients.jedis.Jedis.get"}, Database, "redis"},
			{traces.Frame{Function: "java.net.http.HttpClient.send"}, Network, "http"},
			{traces.Frame{Function: "okhttp3.internal.connection.RealCall.execute"}, Network, "http"},
			{traces.Frame{Function: "org.apache.hc.client5.http.impl.classic.CloseableHttpClient.execute"}, Network, "http"},
			{traces.Frame{Function: "io.grpc.stub.ClientCalls.blockingUnaryCall"}, Network, "grpc"},
			{traces.Frame{Function: "jakarta.servlet.http.HttpServlet.service"}, Entry, ""},
		},
		"python": {
			{traces.Frame{Function: "execute", File: "/usr/lib/python3/site-packages/psycopg2/extensions.py"}, Database, "postgresql"},
			{traces.Frame{Function: "query", File: "/venv/lib/python3.11/site-packages/pymysql/connections.py"}, Database, "mysql"},
			{traces.Frame{Function: "execute", File: "/usr/lib/python3.11/sqlite3/dbapi2.py"}, Database, "sqlite"},
			{traces.Frame{Function: "get", File: "/venv/lib/python3.11/site-packages/requests/api.py"}, Network, "http"},
			{traces.Frame{Function: "request", File: "/usr/lib/python3.11/http/client.py"}, Network, "http"},
			{traces.Frame{Function: "__call__", File: "/venv/lib/python3.11/site-packages/django/core/handlers/wsgi.py"}, Entry, ""},
		},
		"node": {
			{traces.Frame{Function: "Client.query", File: "/srv/app/node_modules/pg/lib/client.js"}, Database, "postgresql"},
			{traces.Frame{Function: "Redis.sendCommand", File: "/srv/app/node_modules/ioredis/built/Redis.js"}, Database, "redis"},
			{traces.Frame{Function: "Axios.request", File: "/srv/app/node_modules/axios/lib/core/Axios.js"}, Network, "http"},
			{traces.Frame{Function: "Layer.handle", File: "/srv/app/node_modules/express/lib/router/layer.js"}, Entry, ""},
		},
		"otel": {
			{traces.Frame{Function: "SELECT", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolDatabase, System: "postgresql"}, Database, "postgresql"},
			{traces.Frame{Function: "GET", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolHTTP, System: "http"}, Network, "http"},
			{traces.Frame{Function: "send", Span: true, SpanKind: traces.SpanKindProducer, Protocol: traces.ProtocolMessaging, System: "kafka"}, Network, "kafka"},
			{traces.Frame{Function: "GET /x", Span: true, SpanKind: traces.SpanKindServer}, Application, ""},
			{traces.Frame{Function: "work", Span: true, SpanKind: traces.SpanKindInternal}, Application, ""},
			{traces.Frame{Function: "call", Span: true, SpanKind: traces.SpanKindClient}, Library, ""},
		},
	}
	for family, rows := range families {
		t.Run(family, func(t *testing.T) {
			for _, row := range rows {
				src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
				id := src.InternFrame(row.frame)
				v := NewClassifier(src, DefaultRules()).Verdict(id)
				if v.Class != row.class || v.System != row.system {
					t.Errorf("%s %s: class %s system %q, want %s %q (%s)", row.frame.Function, row.frame.File, v.Class, v.System, row.class, row.system, v.Reason)
				}
			}
		})
	}
}

func TestRulesFile(t *testing.T) {
	const good = `{
  "app": ["example.com/greenhouse/"],
  "rules": [
    {"class": "database", "function": "example.com/greenhouse/db.(*Pool).", "system": "postgresql"},
    {"class": "library", "regexp": "\\.String$"}
  ]
}`
	user, err := ParseRulesFile("team.json", strings.NewReader(good))
	if err != nil {
		t.Fatal(err)
	}
	rules := Merge(DefaultRules(), user)
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	pool := src.InternFrame(traces.Frame{Function: "example.com/greenhouse/db.(*Pool).Query"})
	str := src.InternFrame(traces.Frame{Function: "example.com/greenhouse/money.Cents.String"})
	app := src.InternFrame(traces.Frame{Function: "example.com/greenhouse/catalog.List"})
	c := NewClassifier(src, rules)
	if v := c.Verdict(pool); v.Class != Database || v.System != "postgresql" || v.Rule.Family != "user" {
		t.Errorf("user database rule: %+v", v)
	}
	if v := c.Verdict(str); v.Class != Library {
		t.Errorf("user library rule overrides app prefix: %+v", v)
	}
	if v := c.Verdict(app); v.Class != Application {
		t.Errorf("app prefix from rules file: %+v", v)
	}
}

func TestRulesFileErrors(t *testing.T) {
	tests := []struct {
		name, input   string
		line, column  int
		wantSubstring string
	}{
		{"syntax", "{\n  \"rules\": [\n    {\"class\": \"database\",, }\n  ]\n}", 3, 26, "invalid character"},
		{"unknown class", "{\"rules\": [\n  {\"class\": \"db\", \"function\": \"x\"}\n]}", 2, 3, "unknown class \"db\""},
		{"two patterns", "{\"rules\": [\n  {\"class\": \"network\", \"function\": \"a\"},\n  {\"class\": \"network\", \"function\": \"x\", \"file\": \"y\"}\n]}", 3, 3, "exactly one of"},
		{"bad regexp", "{\"rules\": [{\"class\": \"network\", \"regexp\": \"(\"}]}", 1, 12, "bad regexp"},
		{"unknown field", "{\"rulez\": []}", 1, 2, "unknown field"},
		{"wrong type", "{\"app\": \"x\"}", 1, 12, "cannot unmarshal"},
		{"bad span", "{\"rules\": [{\"class\": \"network\", \"span\": \"client:ftp\"}]}", 1, 12, "unknown span pattern"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ParseRulesFile("r.json", strings.NewReader(tt.input))
			var re *RulesFileError
			if !errors.As(err, &re) {
				t.Fatalf("err = %v, want *RulesFileError", err)
			}
			if re.Line != tt.line || re.Column != tt.column || !strings.Contains(err.Error(), tt.wantSubstring) {
				t.Errorf("err = %v (line %d col %d), want line %d col %d containing %q", err, re.Line, re.Column, tt.line, tt.column, tt.wantSubstring)
			}
			if !strings.HasPrefix(err.Error(), "r.json:") {
				t.Errorf("error does not name the file: %v", err)
			}
		})
	}
}

func TestRulesFileTrailingData(t *testing.T) {
	_, err := ParseRulesFile("r.json", strings.NewReader("{\"rules\": []}\n{\"rules\": garbage"))
	var re *RulesFileError
	if !errors.As(err, &re) || re.Line != 2 || !strings.Contains(err.Error(), "unexpected data after the JSON object") {
		t.Errorf("err = %v, want r.json:2:… unexpected data", err)
	}
	if _, err := ParseRulesFile("r.json", strings.NewReader("{\"rules\": []}\n\n")); err != nil {
		t.Errorf("trailing white space: %v", err)
	}
}
