package traces

import (
	"testing"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// SDKSpansToOTLPJSON converts spans recorded by the official OpenTelemetry
// Go SDK into the official OTLP protobuf types and encodes them as
// OTLP/JSON per the specification (hex IDs): for the external tests.
func SDKSpansToOTLPJSON(t testing.TB, spans []sdktrace.ReadOnlySpan) string {
	return otlpJSON(t, sdkToProto(spans))
}
