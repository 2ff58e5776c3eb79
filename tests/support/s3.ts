import { S3Client } from '@aws-sdk/client-s3';
import { serviceEnv } from './services';

/**
 * An S3 client on the run's S3 fake, configured like the app's (src/lib/server/s3.ts): path-style addressing
 * and checksums only when required (the SDK's default framing of streamed bodies corrupts them on s3rver).
 */
export function testS3(): S3Client {
  const { s3 } = serviceEnv();
  return new S3Client({
    endpoint: s3.endpoint,
    region: s3.region,
    credentials: { accessKeyId: s3.accessKeyId, secretAccessKey: s3.secretAccessKey },
    forcePathStyle: true,
    requestChecksumCalculation: 'WHEN_REQUIRED',
    responseChecksumValidation: 'WHEN_REQUIRED',
  });
}
