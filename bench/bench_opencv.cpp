// Reference detection stage in OpenCV (Debian libopencv-dev), written as a researcher would for a
// shadowgraph study, to put spume's speed in context (bench/bench_vs_opencv.py drives it).
//
// All frames are loaded into memory first and the background image is given, so only detection is
// timed. Per frame: convert to float, multiply by the inverse background (transmission), divide by
// the frame's median transmission (light flicker), threshold, fill holes by flood-filling the
// outside from the border, connectedComponentsWithStats, and one pass over the pixels summing the
// second-order moments of each label (centroid, ellipse axes). Frames are shared among OpenMP
// threads; OpenCV's own threading is switched off so the thread count is the one asked for.
//
// usage: bench_opencv FRAMES.gray BACKGROUND.gray WIDTH HEIGHT THREADS [THRESHOLD]
//   FRAMES.gray: frames of 8-bit grey, row after row, frame after frame; BACKGROUND.gray: one frame.
// Prints: frames, detections (components with >= 7 px, about 3 px equivalent diameter), the
// detection rate in frames/s, and the rate of one read pass over the frames in memory (the memory
// bandwidth ceiling), each on its own "key value" line.
#include <opencv2/core.hpp>
#include <opencv2/imgproc.hpp>

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <vector>

static std::vector<uint8_t> read_all(const char *path)
{
    std::ifstream f(path, std::ios::binary);
    if (!f) {
        std::fprintf(stderr, "%s: cannot open\n", path);
        std::exit(2);
    }
    return std::vector<uint8_t>((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
}

struct Moments {
    double m00 = 0, m10 = 0, m01 = 0, m20 = 0, m11 = 0, m02 = 0;
};

// Detection of one frame; returns the number of components kept.
static long detect(const cv::Mat &frame, const cv::Mat &inv_bg, double thr, std::vector<float> &scratch)
{
    cv::Mat ratio;
    frame.convertTo(ratio, CV_32F);
    cv::multiply(ratio, inv_bg, ratio);

    // Median transmission of the frame (nth_element on a copy), to cancel flicker of the light.
    const float *p = ratio.ptr<float>();
    scratch.assign(p, p + ratio.total());
    auto mid = scratch.begin() + scratch.size() / 2;
    std::nth_element(scratch.begin(), mid, scratch.end());
    double med = *mid > 0 ? *mid : 1.0;

    cv::Mat mask;
    cv::threshold(ratio, mask, thr * med, 255, cv::THRESH_BINARY_INV);
    mask.convertTo(mask, CV_8U);

    // Fill holes (the bright refraction spot): flood the background from outside, then everything
    // not reached is bubble.
    cv::Mat padded;
    cv::copyMakeBorder(mask, padded, 1, 1, 1, 1, cv::BORDER_CONSTANT, 0);
    cv::Mat outside = padded.clone();
    cv::floodFill(outside, cv::Point(0, 0), 255);
    cv::Mat holes;
    cv::bitwise_not(outside, holes);
    cv::bitwise_or(padded, holes, padded);
    cv::Mat filled = padded(cv::Rect(1, 1, mask.cols, mask.rows));

    cv::Mat labels, stats, centroids;
    int n = cv::connectedComponentsWithStats(filled, labels, stats, centroids, 8, CV_32S);

    std::vector<Moments> m(n);
    for (int y = 0; y < labels.rows; y++) {
        const int *l = labels.ptr<int>(y);
        for (int x = 0; x < labels.cols; x++) {
            int k = l[x];
            if (k == 0)
                continue;
            Moments &a = m[k];
            a.m00 += 1;
            a.m10 += x;
            a.m01 += y;
            a.m20 += (double)x * x;
            a.m11 += (double)x * y;
            a.m02 += (double)y * y;
        }
    }
    long kept = 0;
    for (int k = 1; k < n; k++) {
        const Moments &a = m[k];
        if (a.m00 < 7)
            continue;
        double cx = a.m10 / a.m00, cy = a.m01 / a.m00;
        double mu20 = a.m20 / a.m00 - cx * cx, mu02 = a.m02 / a.m00 - cy * cy, mu11 = a.m11 / a.m00 - cx * cy;
        double common = std::sqrt(4 * mu11 * mu11 + (mu20 - mu02) * (mu20 - mu02));
        double major = std::sqrt(2 * (mu20 + mu02 + common)), minor = std::sqrt(std::max(0.0, 2 * (mu20 + mu02 - common)));
        if (major >= minor)
            kept++;
    }
    return kept;
}

int main(int argc, char **argv)
{
    if (argc < 6) {
        std::fprintf(stderr, "usage: bench_opencv FRAMES.gray BACKGROUND.gray WIDTH HEIGHT THREADS [THRESHOLD]\n");
        return 2;
    }
    int w = std::atoi(argv[3]), h = std::atoi(argv[4]), threads = std::atoi(argv[5]);
    double thr = argc > 6 ? std::atof(argv[6]) : 0.7;
    std::vector<uint8_t> frames = read_all(argv[1]), bgdata = read_all(argv[2]);
    size_t fsize = (size_t)w * h;
    if (w < 1 || h < 1 || threads < 1 || bgdata.size() != fsize || frames.size() % fsize) {
        std::fprintf(stderr, "bench_opencv: sizes do not match %dx%d\n", w, h);
        return 2;
    }
    long nframes = (long)(frames.size() / fsize);
    cv::setNumThreads(1);
    omp_set_num_threads(threads);

    cv::Mat bg(h, w, CV_8U, bgdata.data()), inv_bg;
    bg.convertTo(inv_bg, CV_32F);
    cv::max(inv_bg, 1.0, inv_bg);
    cv::divide(1.0, inv_bg, inv_bg);

    // Memory ceiling: one read pass over every frame (64-bit loads, summed so it is not elided);
    // the fastest of three passes, so page faults and a cold cache do not count.
    double t_read = 1e30;
    uint64_t sum = 0;
    const uint64_t *q = reinterpret_cast<const uint64_t *>(frames.data());
    long nwords = (long)(frames.size() / 8);
    for (int rep = 0; rep < 3; rep++) {
        double t0 = omp_get_wtime();
#pragma omp parallel for reduction(+ : sum) schedule(static)
        for (long i = 0; i < nwords; i++)
            sum += q[i];
        t_read = std::min(t_read, omp_get_wtime() - t0);
    }

    long total = 0;
    double t0 = omp_get_wtime();
#pragma omp parallel reduction(+ : total)
    {
        std::vector<float> scratch;
#pragma omp for schedule(dynamic, 1)
        for (long f = 0; f < nframes; f++) {
            cv::Mat frame(h, w, CV_8U, frames.data() + f * fsize);
            total += detect(frame, inv_bg, thr, scratch);
        }
    }
    double t_det = omp_get_wtime() - t0;
    std::printf("frames %ld\ndetections %ld\nthreads %d\nopencv_fps %.3f\nread_pass_fps %.3f\nread_gb_s %.3f\n"
                "checksum %llu\n",
                nframes, total, threads, nframes / t_det, nframes / t_read, frames.size() / t_read / 1e9,
                (unsigned long long)(sum & 0xffff));
    return 0;
}
