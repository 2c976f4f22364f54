/**
 * code-server (VS Code in the browser, installed by scripts/install-code-server.sh) in a scratch
 * folder of its own: its config, data, temp files, user settings and extensions never touch the
 * home folder, and stopping it ends its whole process group (extension host and engine process too).
 */
import { ChildProcess, execFile, spawn } from 'node:child_process';
import { closeSync, existsSync, mkdirSync, openSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import { promisify } from 'node:util';

export const ROOT = join(__dirname, '..', '..', '..');
export const CODE_SERVER = join(ROOT, '.cache', 'code-server', 'node_modules', '.bin', 'code-server');

/** The scratch folders one run uses; all under one root that the caller removes. */
export interface ScratchDirs { root: string; tmp: string; config: string; data: string; cache: string; userData: string; extensions: string }

export function scratchDirs(root: string): ScratchDirs {
  const d = { root, tmp: join(root, 'tmp'), config: join(root, 'config'), data: join(root, 'data'), cache: join(root, 'cache'),
    userData: join(root, 'user-data'), extensions: join(root, 'extensions') };
  for (const dir of Object.values(d)) mkdirSync(dir, { recursive: true });
  return d;
}

/** Environment that keeps code-server (and Chromium) out of the home folder and the system temp folder. */
export function isolatedEnv(d: ScratchDirs): NodeJS.ProcessEnv {
  return { ...process.env, TMPDIR: d.tmp, XDG_CONFIG_HOME: d.config, XDG_DATA_HOME: d.data, XDG_CACHE_HOME: d.cache };
}

/** User settings that keep the workbench quiet and offline (see shared recipe); theme is a VS Code theme name. */
export function writeUserSettings(d: ScratchDirs, theme: string): void {
  const settings = {
    'workbench.startupEditor': 'none',
    'security.workspace.trust.enabled': false,
    'extensions.autoCheckUpdates': false,
    'extensions.autoUpdate': false,
    'telemetry.telemetryLevel': 'off',
    'update.mode': 'none',
    'workbench.tips.enabled': false,
    'workbench.colorTheme': theme,
  };
  mkdirSync(join(d.userData, 'User'), { recursive: true });
  writeFileSync(join(d.userData, 'User', 'settings.json'), JSON.stringify(settings, null, 2));
}

/** Installs a .vsix the way a user does, and returns the installed extension's manifest. */
export async function installExtension(d: ScratchDirs, vsix: string): Promise<{ dir: string; manifest: Manifest }> {
  const args = ['--install-extension', vsix, '--force', '--user-data-dir', d.userData, '--extensions-dir', d.extensions];
  try {
    await promisify(execFile)(CODE_SERVER, args, { env: isolatedEnv(d), timeout: 60_000 });
  } catch (e) {
    const err = e as { stdout?: string; stderr?: string; message: string };
    throw new Error(`code-server --install-extension ${vsix} failed: ${err.message}\n${err.stdout ?? ''}${err.stderr ?? ''}`);
  }
  const dirs = readdirSync(d.extensions, { withFileTypes: true }).filter((e) => e.isDirectory()).map((e) => join(d.extensions, e.name));
  if (dirs.length !== 1) throw new Error(`expected one installed extension in ${d.extensions}, found ${dirs.length}`);
  return { dir: dirs[0], manifest: JSON.parse(readFileSync(join(dirs[0], 'package.json'), 'utf8')) as Manifest };
}

export interface Manifest {
  name: string;
  publisher: string;
  version: string;
  contributes?: {
    commands?: { command: string; title: string; category?: string }[];
    menus?: Record<string, { command: string; when?: string; group?: string }[]>;
  };
}

export interface RunningCodeServer {
  url: string;
  /** The last lines code-server wrote, for failure messages. */
  logTail(lines?: number): string;
  stop(): Promise<void>;
}

async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const { port } = s.address() as { port: number };
      s.close(() => resolve(port));
    });
  });
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** Is any process of this process group still alive? */
function groupAlive(pgid: number): boolean {
  try { process.kill(-pgid, 0); return true; } catch { return false; }
}

/** Starts code-server detached (its own process group) on a free port and waits for /healthz. */
export async function startCodeServer(d: ScratchDirs, folder: string): Promise<RunningCodeServer> {
  if (!existsSync(CODE_SERVER)) throw new Error(`${CODE_SERVER} is missing: run scripts/install-code-server.sh`);
  const port = await freePort();
  const config = join(d.root, 'code-server.yaml');
  writeFileSync(config, `bind-addr: 127.0.0.1:${port}\nauth: none\ncert: false\n`);
  const logFile = join(d.root, 'code-server.log');
  const log = openSync(logFile, 'a');
  const args = ['--config', config, '--auth', 'none', '--bind-addr', `127.0.0.1:${port}`, '--disable-telemetry',
    '--disable-update-check', '--disable-workspace-trust', '--user-data-dir', d.userData, '--extensions-dir', d.extensions, folder];
  const child: ChildProcess = spawn(CODE_SERVER, args, { detached: true, env: isolatedEnv(d), stdio: ['ignore', log, log] });
  closeSync(log);
  let exited: string | undefined;
  child.on('exit', (code, signal) => { exited = `code ${code}, signal ${signal}`; });
  const logTail = (lines = 40) => (existsSync(logFile) ? readFileSync(logFile, 'utf8').split('\n').slice(-lines).join('\n') : '');
  const pgid = child.pid!;
  const stop = async () => {
    for (const [signal, wait] of [['SIGTERM', 5_000], ['SIGKILL', 5_000]] as const) {
      if (!groupAlive(pgid)) return;
      try { process.kill(-pgid, signal); } catch { /* the group ended meanwhile */ }
      for (let t = 0; t < wait && groupAlive(pgid); t += 100) await sleep(100);
    }
    if (groupAlive(pgid)) throw new Error(`code-server's process group ${pgid} survived SIGKILL`);
  };
  const url = `http://127.0.0.1:${port}`;
  const deadline = Date.now() + 30_000;
  for (;;) {
    if (exited) throw new Error(`code-server exited during start-up (${exited}):\n${logTail()}`);
    try {
      if ((await fetch(`${url}/healthz`)).ok) break;
    } catch { /* not listening yet */ }
    if (Date.now() > deadline) { await stop(); throw new Error(`code-server did not answer ${url}/healthz within 30 s:\n${logTail()}`); }
    await sleep(250);
  }
  return { url, logTail, stop };
}
