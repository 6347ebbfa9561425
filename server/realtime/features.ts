import type { AppDeps } from '../deps';
import type { SocketFeature } from './index';

/** Every feature's socket events. A feature adds its factory here. */
export function socketFeatures(_deps: AppDeps): SocketFeature[] {
  return [];
}
