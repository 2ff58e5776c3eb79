import { DeleteObjectCommand, GetObjectCommand, HeadBucketCommand, PutObjectCommand, S3Client } from '@aws-sdk/client-s3';
import { getSignedUrl } from '@aws-sdk/s3-request-presigner';
import type { Readable } from 'node:stream';
import { config } from './config';

// The SDK is pinned to a release that supports Node.js 20 (later ones need 22); its notice about future
// releases repeats in every process's log without telling operators anything they can act on here.
process.env.AWS_SDK_JS_NODE_VERSION_SUPPORT_WARNING_DISABLED ??= 'true';

let client: S3Client | undefined;

/**
 * The S3 client: endpoint, bucket and credentials from the environment, so s3rver, MinIO or a real bucket
 * is a .env change. Checksums only when required: with the SDK defaults s3rver stores the aws-chunked framing
 * of streamed bodies (stack-notes).
 */
export function s3(): S3Client {
  const c = config();
  client ??= new S3Client({
    endpoint: c.S3_ENDPOINT,
    region: c.S3_REGION,
    forcePathStyle: c.S3_FORCE_PATH_STYLE,
    credentials: { accessKeyId: c.S3_ACCESS_KEY_ID, secretAccessKey: c.S3_SECRET_ACCESS_KEY },
    requestChecksumCalculation: 'WHEN_REQUIRED',
    responseChecksumValidation: 'WHEN_REQUIRED',
    maxAttempts: 2,
  });
  return client;
}

export const bucket = () => config().S3_BUCKET;

export async function putObject(key: string, body: Uint8Array | Buffer, contentType: string, metadata: Record<string, string> = {}) {
  await s3().send(new PutObjectCommand({ Bucket: bucket(), Key: key, Body: body, ContentType: contentType, ContentLength: body.byteLength, Metadata: metadata }));
}

export async function getObjectStream(key: string): Promise<{ body: Readable; length?: number; contentType?: string }> {
  const out = await s3().send(new GetObjectCommand({ Bucket: bucket(), Key: key }));
  return { body: out.Body as Readable, length: out.ContentLength, contentType: out.ContentType };
}

export async function getObjectBytes(key: string): Promise<Uint8Array> {
  const out = await s3().send(new GetObjectCommand({ Bucket: bucket(), Key: key }));
  return out.Body!.transformToByteArray();
}

export async function deleteObject(key: string) {
  await s3().send(new DeleteObjectCommand({ Bucket: bucket(), Key: key }));
}

export async function presignPut(key: string, contentType: string, expiresIn = 900) {
  return getSignedUrl(s3(), new PutObjectCommand({ Bucket: bucket(), Key: key, ContentType: contentType }), { expiresIn });
}

export async function s3Reachable(): Promise<boolean> {
  try {
    await s3().send(new HeadBucketCommand({ Bucket: bucket() }));
    return true;
  } catch {
    return false;
  }
}
