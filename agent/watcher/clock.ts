/** The watcher takes the project's one clock interface (agent/clock.ts). */
export { systemClock, type Clock } from '../clock.js';
