import { z } from 'zod';

/** `sources.options` for an OPC UA source (OPC 10000-4 §7.15 MessageSecurityMode, §7.36 SecurityPolicy URIs). */
export const opcuaSourceOptions = z
  .object({
    securityMode: z.enum(['None', 'Sign', 'SignAndEncrypt']).default('None'),
    securityPolicy: z.enum(['None', 'Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss']).default('None'),
    /** Requested publishing interval of the subscription [ms] (OPC 10000-4 §5.13.2). */
    publishingInterval_ms: z.number().int().min(50).max(60_000).default(500),
    /** Default sampling interval for tags without their own [ms] (OPC 10000-4 §5.12.1.2). */
    samplingInterval_ms: z.number().int().min(0).max(3_600_000).default(1_000),
    /**
     * Trust a server certificate not yet in `<pki>/trusted` (otherwise it is put in `<pki>/rejected`
     * for an integrator to move). Only relevant with Sign or SignAndEncrypt.
     */
    acceptUnknownServerCertificate: z.boolean().default(false),
  })
  .strip();
export type OpcuaSourceOptions = z.infer<typeof opcuaSourceOptions>;
