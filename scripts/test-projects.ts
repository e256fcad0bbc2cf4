import type { SystemPackage } from './system-deps.ts';

/** What each vitest project (vitest.config.ts) needs before it runs. */
export const PROJECT_NEEDS: Record<string, { packages: SystemPackage[]; monitor: boolean }> = {
  unit: { packages: [], monitor: false },
  integration: { packages: ['postgresql', 'mosquitto'], monitor: false },
  e2e: { packages: ['postgresql', 'chromium'], monitor: true },
};

/**
 * The projects vitest will run for these arguments: those named with --project (vitest's `*`
 * wildcard included); else, when every other argument is a path under one project's folder
 * (tests/<project>/…), those; else all of them.
 */
export function selectedProjects(args: string[]): string[] {
  const all = Object.keys(PROJECT_NEEDS);
  const named: string[] = [];
  const positional: string[] = [];
  for (let i = 0; i < args.length; i++) {
    const a = args[i]!;
    if (a === '--project') named.push(args[++i] ?? '');
    else if (a.startsWith('--project=')) named.push(a.slice('--project='.length));
    else positional.push(a);
  }
  if (named.length) {
    const re = (p: string) => new RegExp(`^${p.split('*').map((s) => s.replace(/[.+?^${}()|[\]\\]/g, '\\$&')).join('.*')}$`);
    return all.filter((p) => named.some((n) => re(n).test(p)));
  }
  const byPath = positional.map((a) => /^(?:\.\/)?tests\/([^/]+)\//.exec(a)?.[1]);
  if (positional.length && byPath.every((p) => p !== undefined && all.includes(p))) return [...new Set(byPath as string[])];
  return all;
}
