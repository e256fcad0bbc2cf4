/** The one definition lives in shared/contracts/wiring.ts (the API validates with it too). */
export { opcuaSourceOptions, type OpcuaSourceOptions } from '../../shared/contracts/wiring.ts';
