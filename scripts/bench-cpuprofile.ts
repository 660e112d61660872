// Summarise a V8 .cpuprofile (from `node --cpu-prof`): self time by source file and by function.
//
//   node --cpu-prof --cpu-prof-dir=/tmp/prof dist/scripts/bench-measure-one.js FILE ...
//   node dist/scripts/bench-cpuprofile.js /tmp/prof/*.cpuprofile [top]
//
// Time in native code (sharp/libvips work in the thread pool is not sampled at all; the main
// thread waiting for it shows as "(idle)") is listed under the V8 category names.

import { existsSync, readFileSync } from 'node:fs';
import { SourceMap } from 'node:module';
import { fileURLToPath } from 'node:url';

interface Node {
  id: number;
  callFrame: { functionName: string; url: string; lineNumber: number; columnNumber: number };
  children?: number[];
}
interface Profile {
  nodes: Node[];
  samples: number[];
  timeDeltas: number[];
  startTime: number;
  endTime: number;
}

const maps = new Map<string, SourceMap | null>();

/** The TypeScript source position of a compiled position, from the .js.map beside the file (tsc's sourceMap). */
function sourcePosition(url: string, line0: number, col0: number): { file: string; line: number } | null {
  if (!url.startsWith('file://')) return null;
  let map = maps.get(url);
  if (map === undefined) {
    const path = `${fileURLToPath(url)}.map`;
    map = existsSync(path) ? new SourceMap(JSON.parse(readFileSync(path, 'utf8')) as ConstructorParameters<typeof SourceMap>[0]) : null;
    maps.set(url, map);
  }
  if (!map) return null;
  const e = map.findEntry(line0, col0) as { originalSource?: string; originalLine?: number };
  if (!e || e.originalSource === undefined || e.originalLine === undefined) return null;
  const src = e.originalSource.replace(/^.*?\/(lib|scripts|fixtures)\//, '$1/');
  return { file: src, line: e.originalLine + 1 };
}

function shortUrl(url: string): string {
  const i = url.indexOf('/dist/');
  if (i >= 0) return url.slice(i + 6);
  const j = url.indexOf('node_modules/');
  if (j >= 0) return url.slice(j);
  return url || '(native)';
}

export function summariseProfile(p: Profile, top = 25): string {
  const byId = new Map<number, Node>();
  for (const n of p.nodes) byId.set(n.id, n);
  const self = new Map<number, number>();
  for (let i = 0; i < p.samples.length; i++) {
    const dt = p.timeDeltas[i] ?? 0;
    self.set(p.samples[i]!, (self.get(p.samples[i]!) ?? 0) + dt);
  }
  const byFile = new Map<string, number>();
  const byStage = new Map<string, number>();
  const byFn = new Map<string, number>();
  let total = 0;
  for (const [id, us] of self) {
    const n = byId.get(id)!;
    const f = shortUrl(n.callFrame.url);
    const name = n.callFrame.functionName || '(anonymous)';
    const ts = n.callFrame.url ? sourcePosition(n.callFrame.url, n.callFrame.lineNumber, n.callFrame.columnNumber) : null;
    const key = n.callFrame.url ? (ts ? `${name} ${ts.file}:${ts.line}` : `${name} ${f}:${n.callFrame.lineNumber + 1}`) : name;
    byFile.set(n.callFrame.url ? f : name, (byFile.get(n.callFrame.url ? f : name) ?? 0) + us);
    byFn.set(key, (byFn.get(key) ?? 0) + us);
    const where = ts?.file ?? f;
    const m = /^lib\/([a-z]+)\/(quality|measure-photo)?/.exec(where);
    const stage = m ? (m[2] ? `lib/${m[1]}/${m[2]}` : `lib/${m[1]}`) : n.callFrame.url ? 'other code' : name;
    byStage.set(stage, (byStage.get(stage) ?? 0) + us);
    total += us;
  }
  const fmt = (m: Map<string, number>) =>
    [...m.entries()]
      .sort((a, b) => b[1] - a[1])
      .slice(0, top)
      .map(([k, us]) => `${(us / 1000).toFixed(0).padStart(7)} ms ${((100 * us) / total).toFixed(1).padStart(5)} %  ${k}`)
      .join('\n');
  return `sampled ${(total / 1000).toFixed(0)} ms\n\nby stage (lib folder):\n${fmt(byStage)}\n\nby file:\n${fmt(byFile)}\n\nby function:\n${fmt(byFn)}\n`;
}

if (process.argv[1] && process.argv[1].endsWith('bench-cpuprofile.js')) {
  const files = process.argv.slice(2).filter((a) => a.endsWith('.cpuprofile'));
  const top = Number(process.argv.slice(2).find((a) => /^\d+$/.test(a)) ?? 25);
  for (const f of files) {
    process.stdout.write(`== ${f}\n${summariseProfile(JSON.parse(readFileSync(f, 'utf8')) as Profile, top)}\n`);
  }
}
