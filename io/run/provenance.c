/* io/run/provenance.c: provenance.json (see provenance.h). */
#include "io/run/provenance.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "nn/mat.h"

int provenance_append(const char *run_dir, const char *what, int argc, char **argv, int threads, const char *frames, uint64_t content, Status *st) {
    char path[4200];
    snprintf(path, sizeof path, "%s/provenance.json", run_dir);
    cJSON *root = NULL;
    char *text = NULL;
    Status rs;
    if (fs_exists(path) && !fs_read_file(path, 1 << 20, &text, NULL, &rs)) {
        root = cJSON_Parse(text);
        cJSON *fmt = root ? cJSON_GetObjectItem(root, "format") : NULL;
        if (!cJSON_IsString(fmt) || strcmp(fmt->valuestring, PROVENANCE_FORMAT) ||
            !cJSON_IsArray(cJSON_GetObjectItem(root, "sessions"))) {
            fprintf(stderr, "framelaw: warning: %s is not a provenance file; it is replaced\n", path);
            cJSON_Delete(root);
            root = NULL;
        }
    }
    free(text);
    if (!root) {
        root = cJSON_CreateObject();
        cJSON_AddStringToObject(root, "format", PROVENANCE_FORMAT);
        cJSON_AddNumberToObject(root, "version", PROVENANCE_VERSION);
        cJSON_AddItemToObject(root, "sessions", cJSON_CreateArray());
    }
    cJSON *s = cJSON_CreateObject();
    cJSON_AddStringToObject(s, "command", what);
    cJSON_AddStringToObject(s, "framelaw", FRAMELAW_VERSION);
    cJSON *args = cJSON_AddArrayToObject(s, "argv");
    for (int i = 0; i < argc; i++) cJSON_AddItemToArray(args, cJSON_CreateString(argv[i]));
    char date[32];
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(date, sizeof date, "%Y-%m-%dT%H:%M:%SZ", &tm);
    cJSON_AddStringToObject(s, "started", date);
    char host[256] = "";
    if (gethostname(host, sizeof host - 1)) host[0] = 0;
    cJSON_AddStringToObject(s, "host", host);
    cJSON_AddNumberToObject(s, "threads", threads);
    cJSON_AddStringToObject(s, "blas_core", nn_blas_corename() ? nn_blas_corename() : "");
    const char *cfg = nn_blas_config();
    cJSON_AddStringToObject(s, "blas_config", cfg ? cfg : "");
    if (frames) {
        cJSON_AddStringToObject(s, "frames", frames);
        char hex[24];
        snprintf(hex, sizeof hex, "%016llx", (unsigned long long)content);
        cJSON_AddStringToObject(s, "frames_content", hex);
    }
    cJSON_AddItemToArray(cJSON_GetObjectItem(root, "sessions"), s);
    char *json = cJSON_Print(root);
    cJSON_Delete(root);
    if (!json) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = atomic_write_bytes(path, json, strlen(json), st);
    free(json);
    return rc;
}

int provenance_frames_content(const char *run_dir, uint64_t *content, char *frames, size_t n) {
    char path[4200];
    snprintf(path, sizeof path, "%s/provenance.json", run_dir);
    char *text = NULL;
    Status rs;
    if (!fs_exists(path) || fs_read_file(path, 1 << 20, &text, NULL, &rs)) return 0;
    cJSON *root = cJSON_Parse(text);
    free(text);
    int found = 0;
    cJSON *ses = root ? cJSON_GetObjectItem(root, "sessions") : NULL, *e;
    cJSON_ArrayForEach(e, ses) { /* the newest session that says */
        cJSON *c = cJSON_GetObjectItem(e, "frames_content"), *f = cJSON_GetObjectItem(e, "frames");
        char *end;
        if (!cJSON_IsString(c) || !cJSON_IsString(f) || strlen(c->valuestring) != 16) continue;
        unsigned long long v = strtoull(c->valuestring, &end, 16);
        if (*end) continue;
        *content = (uint64_t)v;
        if (frames && n) snprintf(frames, n, "%s", f->valuestring);
        found = 1;
    }
    cJSON_Delete(root);
    return found;
}
