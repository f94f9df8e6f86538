// Child for the "worker dies with its parent" test: starts an engine worker and a parse worker,
// prints their pids, then waits to be killed. Argument: dist root.
const dist = process.argv[2];
const { EngineWorker } = await import(`${dist}/main/services/engineClient.js`);
const { spawnNodeWorker } = await import(`${dist}/main/services/workerSpawner.js`);
const engine = await EngineWorker.start({ modulePath: `${dist}/main/worker/engineWorker.js` });
void engine.run({ kind: 'probe', mode: 'sleep', ms: 60_000 }).catch(() => undefined);
const parse = spawnNodeWorker({ modulePath: `${dist}/main/worker/parseWorker.js` });
await new Promise((r) => setTimeout(r, 300));
process.stdout.write(`${JSON.stringify({ engine: engine.pid, parse: parse.pid })}\n`);
setInterval(() => undefined, 1000);
