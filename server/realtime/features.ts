import type { AppDeps } from '../deps';
import type { SocketFeature } from './index';
import { caseCommands } from './cases';

/** Every feature's socket events. A feature adds its factory here. */
export function socketFeatures(deps: AppDeps): SocketFeature[] {
  return [caseCommands(deps)];
}
