/**
 * Write the invented demo event to a folder: plan.json, baseline.csv (simulated runs),
 * live.csv (live runs) and truth.json (what the scenario was built to show).
 */
import { mkdir, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { generateScenario, type DemoOptions, type DemoScenario } from '../demo/scenario.js';
import { parsePlan } from '../plan.js';
import { writeTracksCsv } from '../tracks-writer.js';

export interface DemoFiles {
  readonly dir: string;
  readonly plan: string;
  readonly baseline: string;
  readonly live: string;
  readonly truth: string;
  readonly scenario: DemoScenario;
}

export async function writeDemoFiles(dir: string, options: DemoOptions = {}): Promise<DemoFiles> {
  await mkdir(dir, { recursive: true });
  const scenario = generateScenario(options);
  const planText = `${JSON.stringify(scenario.planJson, null, 2)}\n`;
  const plan = parsePlan(planText, 'plan.json');
  const files = {
    dir,
    plan: join(dir, 'plan.json'),
    baseline: join(dir, 'baseline.csv'),
    live: join(dir, 'live.csv'),
    truth: join(dir, 'truth.json'),
  };
  await writeFile(files.plan, planText, 'utf8');
  await writeTracksCsv(files.baseline, scenario.baseline, plan.channels);
  await writeTracksCsv(files.live, scenario.live, plan.channels);
  await writeFile(files.truth, `${JSON.stringify({ truth: scenario.truth, events: scenario.events }, null, 2)}\n`, 'utf8');
  return { ...files, scenario };
}
