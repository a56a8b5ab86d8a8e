'use strict';
// Records the fixture: creates the seedbank database on the PostgreSQL
// server at 127.0.0.1:$PGPORT, starts the two traced services, sends a
// fixed sequence of requests (4 at a time, so that the pool of 2
// connections makes requests wait), stops the services and writes
//   recorded/seedbank.traces.jsonl.gz  both services' spans, OTLP/JSON lines
//   recorded/truth.json                the services' own counts per root cause
// See README.md.
const fs = require('node:fs');
const zlib = require('node:zlib');
const path = require('node:path');
const { spawn } = require('node:child_process');
const { Client } = require('pg');

const PGPORT = process.env.PGPORT || '5432';
const work = fs.mkdtempSync(path.join(require('node:os').tmpdir(), 'seedbank-'));
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

async function setup() {
  const admin = new Client({ host: '127.0.0.1', port: Number(PGPORT), user: 'postgres', database: 'postgres' });
  await admin.connect();
  await admin.query('DROP DATABASE IF EXISTS seedbank');
  await admin.query('CREATE DATABASE seedbank');
  await admin.end();
  const db = new Client({ host: '127.0.0.1', port: Number(PGPORT), user: 'postgres', database: 'seedbank' });
  await db.connect();
  await db.query(`
    CREATE TABLE collections (id int PRIMARY KEY, name text NOT NULL);
    CREATE TABLE seeds (id int PRIMARY KEY, collection_id int NOT NULL REFERENCES collections, variety text NOT NULL, grams int NOT NULL);
    CREATE TABLE germination_tests (id serial PRIMARY KEY, seed_id int NOT NULL REFERENCES seeds, rate real NOT NULL, tested_on date NOT NULL);
    CREATE TABLE packets (id serial PRIMARY KEY, seed_id int NOT NULL, printed_at timestamptz NOT NULL);
    INSERT INTO collections SELECT i, 'collection ' || i FROM generate_series(1, 8) i;
    INSERT INTO seeds SELECT i, 1 + (i - 1) / 5, 'variety ' || i, 1000 FROM generate_series(1, 40) i;
    INSERT INTO germination_tests (seed_id, rate, tested_on)
      SELECT 1 + (i - 1) % 40, 0.5 + (i % 10) / 20.0, date '2026-01-01' + i FROM generate_series(1, 80) i;
  `);
  await db.end();
}

function start(service, port, extra) {
  const env = {
    ...process.env, PGPORT, SEEDBANK_SERVICE: service, SEEDBANK_PORT: String(port),
    SEEDBANK_TRACES: path.join(work, service + '.jsonl'), SEEDBANK_TRUTH: path.join(work, service + '.truth.json'), ...extra,
  };
  const child = spawn(process.execPath, ['--require', path.join(__dirname, 'tracing.js'), path.join(__dirname, 'app.js')], { env, stdio: 'inherit' });
  const exited = new Promise((r) => child.on('exit', r));
  return { child, exited, service, port };
}

async function ready(port) {
  for (let i = 0; i < 100; i++) {
    try {
      if ((await fetch(`http://127.0.0.1:${port}/healthz`)).ok) return;
    } catch { /* not yet */ }
    await sleep(100);
  }
  throw new Error('service on port ' + port + ' did not start');
}

async function load(port) {
  const jobs = [];
  for (let i = 0; i < 40; i++) {
    switch (i % 4) {
      case 0: jobs.push(['GET', '/collections']); break;
      case 2: jobs.push(['POST', `/seeds/${1 + (i % 20)}/withdrawals`, { grams: 1 }]); break;
      default: jobs.push(['GET', `/collections/${1 + (i % 8)}/overview`]);
    }
  }
  let next = 0;
  const worker = async () => {
    while (next < jobs.length) {
      const [method, url, body] = jobs[next++];
      const res = await fetch(`http://127.0.0.1:${port}${url}`, {
        method, headers: body ? { 'content-type': 'application/json' } : {}, body: body ? JSON.stringify(body) : undefined,
      });
      if (!res.ok) throw new Error(`${method} ${url}: ${res.status}`);
      await res.arrayBuffer();
    }
  };
  await Promise.all([worker(), worker(), worker(), worker()]);
}

(async () => {
  await setup();
  const printer = start('packet-printer', 18082, {});
  const seedbank = start('seedbank', 18081, { PRINTER_URL: 'http://127.0.0.1:18082' });
  await ready(18082);
  await ready(18081);
  await load(18081);
  await sleep(500);
  const truth = { generatedBy: 'testdata/nodejs/record.js', services: {} };
  let lines = '';
  for (const s of [seedbank, printer]) {
    s.child.kill('SIGTERM');
    await s.exited;
    const t = JSON.parse(fs.readFileSync(path.join(work, s.service + '.truth.json'), 'utf8'));
    truth.services[s.service] = { requests: t.requests, rootCauses: t.rootCauses };
    lines += fs.readFileSync(path.join(work, s.service + '.jsonl'), 'utf8');
  }
  fs.writeFileSync(path.join(__dirname, 'recorded', 'seedbank.traces.jsonl.gz'), zlib.gzipSync(lines, { level: 9 }));
  fs.writeFileSync(path.join(__dirname, 'recorded', 'truth.json'), JSON.stringify(truth, null, 2) + '\n');
  fs.rmSync(work, { recursive: true });
})().catch((e) => { console.error(e); process.exit(1); });
