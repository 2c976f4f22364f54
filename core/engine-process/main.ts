/**
 * The engine process's entry (dist/engine-process.js): forked by the extension, it serves
 * EngineService over the IPC channel until the parent goes away.
 */
import { EngineService, serveOverIpc } from './service';
import { ENGINE_PROTOCOL_VERSION, FromEngine } from './protocol';

function argValue(name: string): string | undefined {
  const hit = process.argv.find((a) => a.startsWith(`--${name}=`));
  return hit?.slice(name.length + 3);
}

function main(): void {
  if (!process.send) {
    process.stderr.write('factfoil engine: start me with child_process.fork (I talk over the IPC channel)\n');
    process.exit(2);
  }
  const threads = Number(argValue('threads') ?? 0);
  const service = new EngineService({ threads: Number.isInteger(threads) && threads >= 0 ? threads : 0 }, process.env.FACTFOIL_ENGINE_TEST_HOOKS === '1');
  const send = (m: FromEngine) => { if (process.connected) process.send!(m); };
  process.on('uncaughtException', (e) => {
    process.stderr.write(`factfoil engine: internal error: ${e.stack ?? e}\n`);
    process.exit(70);
  });
  // The extension went away: nothing left to serve.
  process.on('disconnect', () => { void service.dispose().finally(() => process.exit(0)); });
  serveOverIpc(service, send, (l) => process.on('message', l));
  send({ v: ENGINE_PROTOCOL_VERSION, type: 'ready', pid: process.pid });
}


if (require.main === module) main();
