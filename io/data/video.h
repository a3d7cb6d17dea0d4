/* io/data/video.h: video files as recordings, decoded by Debian's ffmpeg run as a program.
 *
 * A video file (.mp4 .mov .avi .mkv .webm .m4v .mpg .mpeg .ogv .flv, any case) is one recording. ffprobe
 * gives its size, frame rate and frame count; ffmpeg decodes it through a pipe as 8-bit R'G'B'
 * (rgb24) raw frames, which framelaw turns to luma with the weights of data.gray, exactly as it does
 * for image files (io/data/images.h): no frame is written to disk. Both programs come from the
 * Debian package ffmpeg (make deps installs it); without them the message says how to install it.
 * Programs are started with posix_spawnp (no shell), so any file name works. */
#ifndef IO_VIDEO_H
#define IO_VIDEO_H

#include <stdio.h>
#include <sys/types.h>

#include "io/data/images.h"
#include "nn/core.h"

/* 1 when the file name has a video extension (above). */
int video_is_video_name(const char *name);

typedef struct {
    int width, height;
    double fps;          /* frames per second (the stream's average rate) */
    long frames;         /* frames the container declares (0: it does not say; decoding counts them) */
} VideoInfo;

/* Probe path with ffprobe (the header only: fast). ST_INPUT naming the file when it holds no video stream or cannot be
 * read; ST_INPUT with the install command when ffprobe is missing. */
int video_probe(const char *path, VideoInfo *vi, Status *st);

typedef struct {
    pid_t pid;
    FILE *f;             /* ffmpeg's stdout */
    int width, height;
    unsigned char *buf;  /* (height, width, 3) */
    char path[4096];
    long read;           /* frames read so far */
} VideoReader;

/* Start decoding path (width x height from video_probe). */
int video_open(VideoReader *vr, const char *path, int width, int height, Status *st);
/* The next frame as luma in [0, 1] (height, width) into out. Returns 1 with a frame, 0 at the end,
 * or -1 with st set (a short frame: the file is damaged). */
int video_read_gray(VideoReader *vr, GrayStd g, float *out, Status *st);
/* Stop decoding (kills ffmpeg when frames are left) and wait for it. ST_INPUT when ffmpeg failed
 * on a file it had not finished. */
int video_close(VideoReader *vr, Status *st);

#endif
