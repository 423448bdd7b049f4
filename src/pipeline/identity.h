/* What an input was, recorded in summary.json so a result can be audited or rerun. */
#ifndef SP_PIPELINE_IDENTITY_H
#define SP_PIPELINE_IDENTITY_H

#include "spume.h"
#include "core/jsonw.h"

/* Write an object: path, kind, format, size in bytes and SHA-256 of the first MiB (regular files),
 * frame geometry and count. */
void sp_identity_write(sp_jsonw *j, const char *path, const sp_source_info *info);

/* SHA-256 (hex, 65 bytes with NUL) of the first MiB of a regular file; returns 0 on success. */
int sp_identity_hash(const char *path, char hex[65], long long *size);

#endif
