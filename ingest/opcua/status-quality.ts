import type { QualityGrade } from '../../shared/contracts/sample-quality.ts';

/**
 * Grade of an OPC UA StatusCode: bits 31–30 are the severity, 00 Good, 01 Uncertain, 10 Bad
 * (11 is reserved and treated as Bad) — OPC 10000-4 §7.39 (StatusCode).
 */
export function gradeOfStatusCode(value: number): QualityGrade {
  const severity = (value >>> 30) & 0b11;
  return severity === 0 ? 'good' : severity === 1 ? 'uncertain' : 'bad';
}

/**
 * A Variant's value as a finite number, or an error: scalar Boolean and numeric built-in types
 * (OPC 10000-6 §5.1.2); Int64/UInt64 arrive from node-opcua as [high, low] 32-bit words.
 */
export function numericValue(dataTypeName: string, value: unknown, isArray: boolean): number | { error: string } {
  if (isArray) return { error: `array value of ${dataTypeName} is not a scalar number` };
  if (typeof value === 'number') return Number.isFinite(value) ? value : { error: `${dataTypeName} value is not finite` };
  if (typeof value === 'boolean') return value ? 1 : 0;
  if (Array.isArray(value) && value.length === 2 && (dataTypeName === 'Int64' || dataTypeName === 'UInt64')) {
    const [hi, lo] = value as [number, number];
    return hi * 4_294_967_296 + (lo >>> 0);
  }
  return { error: `${dataTypeName} value is not numeric` };
}
