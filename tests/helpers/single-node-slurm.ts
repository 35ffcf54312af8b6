import { spawnSync, type SpawnSyncReturns } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { chmod, mkdir, readFile, writeFile } from 'node:fs/promises';
import { createServer } from 'node:net';
import { join } from 'node:path';

/**
 * A real single-node Slurm from Debian's packages (slurmctld, slurmd, slurm-client, munge), with its
 * configuration, key, state, spool, pid and log files in one temporary folder: started as root, stopped
 * by its pid files. The commands (sbatch, squeue, scancel, scontrol) find it through SLURM_CONF.
 */
export interface SingleNodeSlurm {
  dir: string;
  /** The environment for Slurm's commands and the jobs they submit. */
  env: NodeJS.ProcessEnv;
  /** Runs a Slurm command; throws with its output when it fails. */
  command(name: string, args: string[]): string;
  /** The tail of the daemons' logs, for failure messages. */
  logs(): Promise<string>;
  stop(): Promise<void>;
}

const PROGRAMS = ['munged', 'slurmctld', 'slurmd', 'sbatch', 'squeue', 'scancel', 'scontrol', 'sinfo'];

/**
 * Why a single-node Slurm cannot start here, or undefined when it can. `.ci/run` installs the packages.
 * @example
 *   const reason = slurmMissing(); // 'not root: slurmd starts jobs as their users, which needs root'
 */
export function slurmMissing(): string | undefined {
  if (process.platform !== 'linux') return 'Slurm runs on Linux only';
  if (process.getuid?.() !== 0) return 'not root: slurmd starts jobs as their users, which needs root';
  const missing = PROGRAMS.filter((p) => spawnSync('sh', ['-c', `command -v ${p}`], { env: withSbin(process.env) }).status !== 0);
  if (missing.length) return `${missing.join(', ')} not installed: apt-get install slurmctld slurmd slurm-client munge (.ci/run does)`;
  return undefined;
}

function withSbin(env: NodeJS.ProcessEnv): NodeJS.ProcessEnv {
  return { ...env, PATH: `${env.PATH ?? ''}:/usr/sbin:/sbin` };
}

async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      server.close(() => (typeof address === 'object' && address ? resolve(address.port) : reject(new Error('no port'))));
    });
  });
}

function runs(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
}

const sleep = (ms: number): Promise<void> => new Promise((resolve) => setTimeout(resolve, ms));

/**
 * Starts munged, slurmctld and slurmd under `dir` and waits until the node is idle.
 * @example
 *   const slurm = await startSlurm(await mkdtemp(join(tmpdir(), 'slurm-')));
 *   slurm.command('sbatch', ['--parsable', 'job.sh']);
 *   await slurm.stop();
 */
export async function startSlurm(dir: string): Promise<SingleNodeSlurm> {
  const env = withSbin({ ...process.env, SLURM_CONF: join(dir, 'slurm.conf') });
  const pidFiles = ['slurmd.pid', 'slurmctld.pid', 'munged.pid'].map((n) => join(dir, n));
  const check = (name: string, r: SpawnSyncReturns<string>): string => {
    if (r.status !== 0) throw new Error(`${name} failed (exit ${r.status}): ${r.stderr}${r.stdout}`);
    return r.stdout;
  };
  const command = (name: string, args: string[]): string =>
    check(`${name} ${args.join(' ')}`, spawnSync(name, args, { env, encoding: 'utf8', timeout: 30_000 }));
  const logs = async (): Promise<string> => {
    const tails = await Promise.all(
      ['munged.log', 'slurmctld.log', 'slurmd.log'].map(
        async (n) => `--- ${n}\n${(await readFile(join(dir, n), 'utf8').catch(() => '')).split('\n').slice(-15).join('\n')}`,
      ),
    );
    return tails.join('\n');
  };
  const stop = async (): Promise<void> => {
    for (const file of pidFiles) {
      const pid = Number((await readFile(file, 'utf8').catch(() => '')).trim());
      if (!pid || !runs(pid)) continue;
      process.kill(pid, 'SIGTERM');
      for (let i = 0; i < 100 && runs(pid); i++) await sleep(100);
      if (runs(pid)) process.kill(pid, 'SIGKILL');
    }
  };

  try {
    await mkdir(join(dir, 'state'), { recursive: true });
    await mkdir(join(dir, 'spool'), { recursive: true });
    const key = join(dir, 'munge.key');
    await writeFile(key, randomBytes(128), { mode: 0o600 });
    await chmod(key, 0o600);
    const socket = join(dir, 'munge.sock');
    command('munged', [
      `--key-file=${key}`,
      `--socket=${socket}`,
      `--pid-file=${join(dir, 'munged.pid')}`,
      `--log-file=${join(dir, 'munged.log')}`,
      `--seed-file=${join(dir, 'munged.seed')}`,
      '--force',
    ]);
    // `slurmd -C` describes this machine as a node line (name, CPUs, sockets, memory).
    const node = check('slurmd -C', spawnSync('slurmd', ['-C'], { env, encoding: 'utf8' }))
      .split('\n')[0]!
      .trim();
    const name = /^NodeName=(\S+)/.exec(node)?.[1];
    if (!name) throw new Error(`slurmd -C printed no node line: ${node}`);
    const [ctldPort, slurmdPort] = [await freePort(), await freePort()];
    await writeFile(
      env.SLURM_CONF!,
      [
        'ClusterName=kinhuetest',
        `SlurmctldHost=${name}(127.0.0.1)`,
        'SlurmUser=root',
        `SlurmctldPort=${ctldPort}`,
        `SlurmdPort=${slurmdPort}`,
        'AuthType=auth/munge',
        'CredType=cred/munge',
        `AuthInfo=socket=${socket}`,
        `StateSaveLocation=${join(dir, 'state')}`,
        `SlurmdSpoolDir=${join(dir, 'spool')}`,
        `SlurmctldPidFile=${pidFiles[1]}`,
        `SlurmdPidFile=${pidFiles[0]}`,
        `SlurmctldLogFile=${join(dir, 'slurmctld.log')}`,
        `SlurmdLogFile=${join(dir, 'slurmd.log')}`,
        // No cgroups: the test may run in a container without them.
        'ProctrackType=proctrack/linuxproc',
        'TaskPlugin=task/none',
        'JobAcctGatherType=jobacct_gather/none',
        'AccountingStorageType=accounting_storage/none',
        'JobCompType=jobcomp/none',
        'MpiDefault=none',
        'SchedulerType=sched/builtin',
        'SelectType=select/cons_tres',
        'SelectTypeParameters=CR_Core',
        'ReturnToService=2',
        `${node} NodeAddr=127.0.0.1 State=UNKNOWN`,
        `PartitionName=test Nodes=${name} Default=YES MaxTime=INFINITE State=UP`,
        '',
      ].join('\n'),
    );
    command('slurmctld', ['-f', env.SLURM_CONF!]);
    command('slurmd', ['-f', env.SLURM_CONF!]);
    for (let i = 0; ; i++) {
      const state = spawnSync('sinfo', ['-h', '-o', '%t'], { env, encoding: 'utf8' }).stdout?.trim();
      if (state === 'idle') break;
      if (i > 150) throw new Error(`the node did not become idle (state ${state || 'unknown'})`);
      await sleep(200);
    }
  } catch (error) {
    const text = await logs();
    await stop();
    throw new Error(`${(error as Error).message}\n${text}`);
  }
  return { dir, env, command, logs, stop };
}
