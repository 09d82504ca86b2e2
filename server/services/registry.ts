import type { Gateway } from '../../gateway/index';
import type { Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import type { ValveDispatcher } from './dispatcher';
import type { Scheduler } from '../scheduler/scheduler';

/** The live parts a running server has, handed to routes through AppDeps.services. */
export type Services = {
  fleet: Fleet;
  bus: LiveBus;
  gateway: Gateway;
  dispatcher: ValveDispatcher;
  scheduler: Scheduler;
  /** Demo mode: where the simulated fleet's control API listens (set once it runs). */
  demo: { simulatorUrl?: string };
};
