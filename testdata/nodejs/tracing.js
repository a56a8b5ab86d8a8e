'use strict';
// Loaded with `node --require ./tracing.js app.js`: the official
// OpenTelemetry JS SDK with the http, express and pg instrumentations,
// exporting each batch of spans as one line of OTLP/JSON (the SDK's own
// JSON serialisation, as its OTLP/HTTP exporter sends it) to
// $SEEDBANK_TRACES.
const fs = require('node:fs');
const { NodeTracerProvider, BatchSpanProcessor } = require('@opentelemetry/sdk-trace-node');
const { resourceFromAttributes } = require('@opentelemetry/resources');
const { registerInstrumentations } = require('@opentelemetry/instrumentation');
const { HttpInstrumentation } = require('@opentelemetry/instrumentation-http');
const { ExpressInstrumentation } = require('@opentelemetry/instrumentation-express');
const { PgInstrumentation } = require('@opentelemetry/instrumentation-pg');
const { JsonTraceSerializer } = require('@opentelemetry/otlp-transformer');

const out = process.env.SEEDBANK_TRACES;
const fd = fs.openSync(out, 'a');

// A span exporter writing OTLP/JSON lines (the OTLP file exporter's format).
class JsonLinesExporter {
  export(spans, done) {
    const body = Buffer.from(JsonTraceSerializer.serializeRequest(spans)).toString('utf8');
    fs.writeSync(fd, body.replace(/\n/g, '') + '\n');
    done({ code: 0 });
  }
  shutdown() { fs.fsyncSync(fd); return Promise.resolve(); }
  forceFlush() { return Promise.resolve(); }
}

const provider = new NodeTracerProvider({
  resource: resourceFromAttributes({ 'service.name': process.env.SEEDBANK_SERVICE }),
  spanProcessors: [new BatchSpanProcessor(new JsonLinesExporter(), { scheduledDelayMillis: 200, maxExportBatchSize: 256 })],
});
provider.register();
registerInstrumentations({
  instrumentations: [new HttpInstrumentation(), new ExpressInstrumentation(), new PgInstrumentation()],
});
global.__seedbankProvider = provider;
