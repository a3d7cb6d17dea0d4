/* io/data/video.c: video files as recordings through ffprobe and ffmpeg (see video.h). */
#include "io/data/video.h"

#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/wait.h>
#include <unistd.h>

extern char **environ;

static const char *const VIDEO_EXT[] = {".mp4", ".mov", ".avi", ".mkv", ".webm", ".m4v", ".mpg", ".mpeg", ".ogv", ".flv"};

int video_is_video_name(const char *name) {
    const char *dot = strrchr(name, '.');
    if (!dot) return 0;
    for (size_t i = 0; i < sizeof VIDEO_EXT / sizeof VIDEO_EXT[0]; i++)
        if (!strcasecmp(dot, VIDEO_EXT[i])) return 1;
    return 0;
}

#define INSTALL_HINT "install it with: apt-get install ffmpeg (make deps does)"

/* Start argv[0] with stdout into a pipe (stderr to /dev/null). *out receives the read end. */
static int spawn_pipe(char *const argv[], pid_t *pid, FILE **out, Status *st) {
    int fd[2];
    if (pipe(fd)) return status_set(st, ST_RUNTIME, "pipe: %s", strerror(errno));
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_adddup2(&fa, fd[1], 1);
    posix_spawn_file_actions_addclose(&fa, fd[0]);
    posix_spawn_file_actions_addclose(&fa, fd[1]);
    posix_spawn_file_actions_addopen(&fa, 2, "/dev/null", O_WRONLY, 0);
    posix_spawn_file_actions_addopen(&fa, 0, "/dev/null", O_RDONLY, 0);
    int e = posix_spawnp(pid, argv[0], &fa, NULL, argv, environ);
    posix_spawn_file_actions_destroy(&fa);
    close(fd[1]);
    if (e) {
        close(fd[0]);
        if (e == ENOENT) return status_set(st, ST_INPUT, "%s: not found; %s", argv[0], INSTALL_HINT);
        return status_set(st, ST_RUNTIME, "%s: cannot start: %s", argv[0], strerror(e));
    }
    *out = fdopen(fd[0], "r");
    if (!*out) {
        close(fd[0]);
        kill(*pid, SIGKILL);
        waitpid(*pid, NULL, 0);
        return status_set(st, ST_RUNTIME, "fdopen: %s", strerror(errno));
    }
    return 0;
}

static int wait_ok(pid_t pid) {
    int ws;
    while (waitpid(pid, &ws, 0) < 0)
        if (errno != EINTR) return 0;
    return WIFEXITED(ws) && WEXITSTATUS(ws) == 0;
}

int video_probe(const char *path, VideoInfo *vi, Status *st) {
    memset(vi, 0, sizeof *vi);
    char *argv[] = {"ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries",
                    "stream=width,height,avg_frame_rate,nb_frames", "-of", "default=noprint_wrappers=1",
                    (char *)path, NULL};
    pid_t pid;
    FILE *f;
    if (spawn_pipe(argv, &pid, &f, st)) return st->code;
    char line[256];
    long num = 0, den = 0;
    while (fgets(line, sizeof line, f)) {
        if (!strncmp(line, "width=", 6)) vi->width = atoi(line + 6);
        else if (!strncmp(line, "height=", 7)) vi->height = atoi(line + 7);
        else if (!strncmp(line, "avg_frame_rate=", 15)) sscanf(line + 15, "%ld/%ld", &num, &den);
        else if (!strncmp(line, "nb_frames=", 10)) vi->frames = atol(line + 10); /* "N/A": 0 */
    }
    fclose(f);
    int ok = wait_ok(pid);
    if (!ok || vi->width <= 0 || vi->height <= 0)
        return status_set(st, ST_INPUT, "%s: not a readable video (ffprobe found no video stream)", path);
    if (num <= 0 || den <= 0)
        return status_set(st, ST_INPUT, "%s: the video gives no frame rate; set data.fps", path);
    vi->fps = (double)num / (double)den;
    return 0;
}

int video_open(VideoReader *vr, const char *path, int width, int height, Status *st) {
    memset(vr, 0, sizeof *vr);
    snprintf(vr->path, sizeof vr->path, "%s", path);
    vr->width = width, vr->height = height;
    vr->buf = malloc((size_t)width * height * 3);
    if (!vr->buf) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    char *argv[] = {"ffmpeg", "-v", "error", "-nostdin", "-i", (char *)path, "-map", "0:v:0", "-vsync", "passthrough",
                    "-f", "rawvideo", "-pix_fmt", "rgb24", "-", NULL};
    if (spawn_pipe(argv, &vr->pid, &vr->f, st)) {
        free(vr->buf);
        vr->buf = NULL;
        return st->code;
    }
    return 0;
}

int video_read_gray(VideoReader *vr, GrayStd g, float *out, Status *st) {
    size_t n = (size_t)vr->width * vr->height * 3, got = fread(vr->buf, 1, n, vr->f);
    if (got == 0) return 0;
    if (got < n) {
        status_set(st, ST_INPUT, "%s: frame %ld is cut short (%zu of %zu bytes): the file is damaged", vr->path,
                   vr->read, got, n);
        return -1;
    }
    double w[3];
    gray_weights(g, w);
    for (long i = 0; i < (long)vr->width * vr->height; i++) {
        const unsigned char *p = vr->buf + 3 * i;
        out[i] = (float)((w[0] * p[0] + w[1] * p[1] + w[2] * p[2]) / 255.0);
    }
    vr->read++;
    return 1;
}

int video_close(VideoReader *vr, Status *st) {
    if (!vr->f) return 0;
    int at_end = fgetc(vr->f) == EOF;
    if (!at_end) kill(vr->pid, SIGTERM);
    fclose(vr->f);
    vr->f = NULL;
    int ok = wait_ok(vr->pid);
    free(vr->buf);
    vr->buf = NULL;
    if (at_end && !ok) return status_set(st, ST_INPUT, "%s: ffmpeg could not decode the whole video", vr->path);
    return 0;
}
