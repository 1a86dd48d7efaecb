/** The watcher stage: what the CLI and the live agent import. */
export { assessWindow, type WindowAssessment, type ChannelVectorChange } from './assess.js';
export {
  openWatcher,
  Watcher,
  type WatcherDeps,
  type WatchStatus,
  type WatchUpdate,
} from './watcher.js';
export { systemClock, type Clock } from './clock.js';
export type { Baseline, BaselineChannel } from './baseline.js';
export type { BalanceForecast } from './forecast.js';
export type { HealthReport, ChannelHealth, TachState } from './health.js';
export type { HistoryPoint, HistoryStore } from './history.js';
export { FileHistoryStore } from './history.js';
export type { Zone, Limits } from './limits.js';
export type { UnbalanceAssessment, UnbalanceKind, OneXCause, Confidence } from './signature.js';
export { FileBaselineStore, FileCoefficientsSource, FileWatcherStateStore } from './stores.js';
export type {
  BaselineStore,
  CoefficientsSource,
  WatcherSnapshot,
  WatcherStateStore,
} from './stores.js';
export type { TrendReport, SeriesTrend } from './trend.js';
export type { WatcherEventType } from './events.js';
export type { ZoneReport, ChannelZone, SpeedReport } from './zones.js';
export { readWindowsFile } from './window-file.js';
