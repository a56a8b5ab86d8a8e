'use strict';
// The seed bank of the invented greenhouse nursery: a tiny express + pg
// service (and, with SEEDBANK_SERVICE=packet-printer, the service that
// prints seed packets for it). It counts every query and outgoing call it
// makes, per root cause as a reader of its code would name it, and writes
// the counts to $SEEDBANK_TRUTH when it stops (SIGTERM).
const fs = require('node:fs');
const http = require('node:http');
const express = require('express');
const { Pool } = require('pg');
const { trace } = require('@opentelemetry/api');

const service = process.env.SEEDBANK_SERVICE;
const port = Number(process.env.SEEDBANK_PORT);
// A small pool, so that concurrent requests wait for connections.
const pool = new Pool({ host: '127.0.0.1', port: Number(process.env.PGPORT), user: 'postgres', database: 'seedbank', max: 2 });
const tracer = trace.getTracer('greenhouse-seedbank');

const counts = {}; // root cause → {database, network}
let requests = 0;
function count(cause, kind) {
  const c = (counts[cause] ||= { database: 0, network: 0 });
  c[kind]++;
}
function q(cause, text, params) {
  count(cause, 'database');
  return pool.query(text, params);
}
// The root cause of a query issued by a route handler outside any span of
// the application's own: the route.
const route = (req) => `${req.method} ${req.route.path}`;

function post(cause, url, body) {
  count(cause, 'network');
  return new Promise((resolve, reject) => {
    const r = http.request(url, { method: 'POST', headers: { 'content-type': 'application/json' } }, (res) => {
      res.resume();
      res.on('end', () => resolve(res.statusCode));
    });
    r.on('error', reject);
    r.end(JSON.stringify(body));
  });
}

const app = express();
app.use(express.json());
app.use(function requestLog(req, res, next) { requests++; next(); });

if (service === 'seedbank') {
  // An N+1 loop: one count per collection, inside a span of the
  // application's own.
  app.get('/collections', async (req, res) => {
    const { rows } = await q(route(req), 'SELECT id, name FROM collections ORDER BY id');
    const withCounts = await tracer.startActiveSpan('countSeeds', async (span) => {
      try {
        const out = [];
        for (const c of rows) {
          const r = await q('countSeeds', 'SELECT count(*) AS n FROM seeds WHERE collection_id = $1', [c.id]);
          out.push({ ...c, seeds: Number(r.rows[0].n) });
        }
        return out;
      } finally {
        span.end();
      }
    });
    res.json(withCounts);
  });

  // Three queries in parallel.
  app.get('/collections/:id/overview', async (req, res) => {
    const id = Number(req.params.id);
    const cause = route(req);
    const [c, s, g] = await Promise.all([
      q(cause, 'SELECT id, name FROM collections WHERE id = $1', [id]),
      q(cause, 'SELECT count(*) AS n, sum(grams) AS grams FROM seeds WHERE collection_id = $1', [id]),
      q(cause, 'SELECT s.variety, t.rate FROM germination_tests t JOIN seeds s ON s.id = t.seed_id WHERE s.collection_id = $1 ORDER BY t.tested_on DESC LIMIT 5', [id]),
    ]);
    res.json({ collection: c.rows[0], seeds: s.rows[0], tests: g.rows });
  });

  // A second handler: two queries and a call to the packet printer.
  app.post('/seeds/:id/withdrawals', async (req, res) => {
    const id = Number(req.params.id);
    const cause = route(req);
    const { rows } = await q(cause, 'SELECT grams FROM seeds WHERE id = $1', [id]);
    await q(cause, 'UPDATE seeds SET grams = grams - $2 WHERE id = $1', [id, req.body.grams]);
    await post(cause, process.env.PRINTER_URL + '/packets', { seed: id });
    res.status(201).json({ before: rows[0].grams });
  });
} else {
  app.post('/packets', async (req, res) => {
    await q(route(req), 'INSERT INTO packets (seed_id, printed_at) VALUES ($1, now())', [req.body.seed]);
    res.status(201).end();
  });
}

app.get('/healthz', (req, res) => res.send('ok'));

const server = app.listen(port, '127.0.0.1', () => console.log(`${service} listening on ${port}`));
process.on('SIGTERM', async () => {
  server.close();
  await pool.end();
  await global.__seedbankProvider.shutdown();
  fs.writeFileSync(process.env.SEEDBANK_TRUTH, JSON.stringify({ service, requests, rootCauses: counts }, null, 2) + '\n');
  process.exit(0);
});
