package attribute

import (
	"testing"

	"github.com/culprithq/culprit/traces"
)

// Instrumentation scope names. The JavaScript ones are as the official
// OpenTelemetry JS instrumentations wrote them in testdata/nodejs; the
// others follow the naming conventions of the OpenTelemetry projects for
// Go (contrib module paths), Java (the agent's io.opentelemetry.*
// scopes), Python, .NET and Ruby, and of common third-party packages,
// recalled from memory.
func TestInstrumentationScopes(t *testing.T) {
	for scope, want := range map[string]bool{
		"@opentelemetry/instrumentation-express":                        true,
		"@opentelemetry/instrumentation-http":                           true,
		"@opentelemetry/instrumentation-pg":                             true,
		"go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp": true,
		"github.com/exaring/otelpgx":                                    true,
		"github.com/XSAM/otelsql":                                       true,
		"io.opentelemetry.spring-webmvc-6.0":                            true,
		"io.opentelemetry.jdbc":                                         true,
		"opentelemetry.instrumentation.flask":                           true,
		"OpenTelemetry.Instrumentation.AspNetCore":                      true,
		"OpenTelemetry::Instrumentation::Rails":                         true,
		"@prisma/instrumentation":                                       true,
		// The application's own tracers.
		"greenhouse-seedbank":                 false,
		"github.com/culprithq/greenhouse/api": false,
		"hotel-bookings":                      false,
		"com.nursery.catalog":                 false,
		"otel":                                false,
		"":                                    false,
		"go.opentelemetry.io/otel/sdk/tracer-tests": false,
	} {
		if got := isInstrumentationScope(scope); got != want {
			t.Errorf("isInstrumentationScope(%q) = %v, want %v", scope, got, want)
		}
	}
}

// Spans made by instrumentation libraries for their own layers are not
// application code, with or without --app; SERVER spans (the route) and
// the application's own spans are, and --app matches a span's scope.
func TestSpanOwnership(t *testing.T) {
	express := "@opentelemetry/instrumentation-express"
	span := func(kind traces.SpanKind, name, scope string) traces.Frame {
		return traces.Frame{Function: name, SpanKind: kind, Scope: scope, Service: "seedbank", Span: true}
	}
	javaController := span(traces.SpanKindInternal, "com.nursery.catalog.VarietyController.list", "io.opentelemetry.spring-webmvc-6.0")
	javaController.Code = true
	tests := []struct {
		name  string
		frame traces.Frame
		app   []string
		class Class
	}{
		{"express request handler", span(traces.SpanKindInternal, "request handler", express), nil, Library},
		{"express middleware", span(traces.SpanKindInternal, "middleware - jsonParser", express), nil, Library},
		{"express middleware with --app", span(traces.SpanKindInternal, "middleware - requestLog", express), []string{"countSeeds"}, Library},
		{"route", span(traces.SpanKindServer, "GET /collections", "@opentelemetry/instrumentation-http"), nil, Application},
		{"route with --app", span(traces.SpanKindServer, "GET /collections", "@opentelemetry/instrumentation-http"), []string{"countSeeds"}, Application},
		{"own span", span(traces.SpanKindInternal, "countSeeds", "greenhouse-seedbank"), nil, Application},
		{"own span, --app by scope", span(traces.SpanKindInternal, "countSeeds", "greenhouse-seedbank"), []string{"greenhouse-"}, Application},
		{"own span, --app by name", span(traces.SpanKindInternal, "countSeeds", "greenhouse-seedbank"), []string{"count"}, Application},
		{"instrumentation span naming code", javaController, nil, Application},
		{"database client", span(traces.SpanKindClient, "pg-pool.connect", "@opentelemetry/instrumentation-pg"), nil, Library},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rules := DefaultRules()
			rules.App = tt.app
			c := &Classifier{rules: rules, m: newMatcher(rules)}
			if v := c.classify(&tt.frame); v.Class != tt.class && !(tt.class == Library && v.Class.IsBoundary()) {
				t.Errorf("class %v (%s), want %v", v.Class, v.Reason, tt.class)
			}
		})
	}
}
