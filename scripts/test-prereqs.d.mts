// Types for scripts/test-prereqs.mjs, which test/support/global-setup.ts imports.
export interface Missing {
  readonly name: string;
  readonly pkg: string;
  readonly why: string;
}
export function findExecutable(name: string, env?: NodeJS.ProcessEnv): string | null;
export function testPython(env?: NodeJS.ProcessEnv): string;
export function missingPrerequisites(env?: NodeJS.ProcessEnv): Missing[];
export function nodeProblem(version?: string): string | null;
export function installCommand(missing: readonly Missing[]): string;
export function cannotInstallBecause(env?: NodeJS.ProcessEnv): string | null;
export function missingMessage(missing: readonly Missing[], why: string): string;
export function main(): number;
