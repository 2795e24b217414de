// Timing of forward kinematics and an effector frame Jacobian with Pinocchio, a
// general-purpose rigid-body dynamics library (PyPI package `pin`, whose wheel ships the
// C++ headers), to compare with Clamber's `cargo bench --bench kinematics`.
//
// Built header-only by reference/run_pinocchio_bench.sh, which also writes the input: the
// model (parsed from Clamber's URDF export by Pinocchio's own Python URDF parser, written
// as joints + one frame, since linking the prebuilt parser library is avoided), 1024
// random configurations, and Pinocchio's own grip pose and frame Jacobian at the first
// configurations, which this program checks before timing (so the model rebuilt here is
// the robot that was exported).
//
// Usage: pinocchio_bench MODEL.txt [runs=11] [calls=1000000]
// Output: one line per operation: median and minimum wall-clock ns per call over the runs
// and median thread-CPU ns per call.

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include <pinocchio/algorithm/frames.hpp>
#include <pinocchio/algorithm/jacobian.hpp>
#include <pinocchio/algorithm/kinematics.hpp>
#include <pinocchio/multibody.hpp>

using namespace pinocchio;

static SE3 read_se3(std::istream &in) {
  Eigen::Matrix3d r;
  Eigen::Vector3d t;
  for (int i = 0; i < 3; ++i)
    for (int j = 0; j < 3; ++j) in >> r(i, j);
  in >> t(0) >> t(1) >> t(2);
  return SE3(r, t);
}

static JointModel make_joint(const std::string &type, const Eigen::Vector3d &axis) {
  if (type == "JointModelRX") return JointModelRX();
  if (type == "JointModelRY") return JointModelRY();
  if (type == "JointModelRZ") return JointModelRZ();
  if (type == "JointModelRevoluteUnaligned") return JointModelRevoluteUnaligned(axis);
  if (type == "JointModelPX") return JointModelPX();
  if (type == "JointModelPY") return JointModelPY();
  if (type == "JointModelPZ") return JointModelPZ();
  if (type == "JointModelPrismaticUnaligned") return JointModelPrismaticUnaligned(axis);
  if (type == "JointModelFreeFlyer") return JointModelFreeFlyer();
  throw std::runtime_error("unsupported joint model " + type);
}

// Nanoseconds this thread has spent on a CPU (Linux /proc/thread-self/schedstat, first
// field): unlike wall time it does not count time the thread waited while other processes
// ran, which matters on a shared machine. Same source as the Rust loop mode.
static double thread_cpu_ns() {
  std::ifstream f("/proc/thread-self/schedstat");
  double ns = 0.0;
  f >> ns;
  return ns;
}

struct Timing {
  double wall_median, wall_min, cpu_median;
};

static double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

template <class F>
static Timing time_ns(F &&f, long calls, int runs) {
  std::vector<double> wall, cpu;
  for (int r = 0; r < runs; ++r) {
    double c0 = thread_cpu_ns();
    auto t0 = std::chrono::steady_clock::now();
    for (long k = 0; k < calls; ++k) f(k);
    auto t1 = std::chrono::steady_clock::now();
    double c1 = thread_cpu_ns();
    wall.push_back(std::chrono::duration<double, std::nano>(t1 - t0).count() / double(calls));
    cpu.push_back((c1 - c0) / double(calls));
  }
  return {median(wall), *std::min_element(wall.begin(), wall.end()), median(cpu)};
}

static void report(const char *what, const Timing &t) {
  std::printf("%-62s wall median %7.1f ns  min %7.1f ns  cpu median %7.1f ns\n", what, t.wall_median,
              t.wall_min, t.cpu_median);
}

int main(int argc, char **argv) {
  if (argc < 2) {
    std::cerr << "usage: pinocchio_bench MODEL.txt [runs]\n";
    return 2;
  }
  const int runs = argc > 2 ? std::atoi(argv[2]) : 11;
  std::ifstream in(argv[1]);
  if (!in) {
    std::cerr << "cannot read " << argv[1] << "\n";
    return 2;
  }

  Model model;
  std::string word;
  int njoints = 0;
  in >> word >> njoints;  // "joints" N
  for (int i = 0; i < njoints; ++i) {
    std::string name, type;
    int parent;
    Eigen::Vector3d axis;
    in >> name >> parent >> type >> axis(0) >> axis(1) >> axis(2);
    SE3 placement = read_se3(in);
    model.addJoint(JointIndex(parent), make_joint(type, axis), placement, name);
  }
  std::string frame_name;
  int frame_joint;
  in >> word >> frame_name >> frame_joint;  // "frame" name parent_joint R t
  SE3 frame_placement = read_se3(in);
  const FrameIndex fid = model.addFrame(Frame(frame_name, JointIndex(frame_joint), frame_placement, OP_FRAME));

  int nconf = 0, nq = 0;
  in >> word >> nconf >> nq;  // "configs" M nq
  if (nq != model.nq) throw std::runtime_error("nq mismatch");
  std::vector<Eigen::VectorXd> qs(nconf, Eigen::VectorXd(nq));
  for (auto &q : qs)
    for (int k = 0; k < nq; ++k) in >> q(k);

  Data data(model);
  Data::Matrix6x J = Data::Matrix6x::Zero(6, model.nv);

  // Check against Pinocchio-from-URDF values computed by the Python side.
  int ncheck = 0;
  in >> word >> ncheck;  // "check" K
  double worst = 0.0;
  for (int c = 0; c < ncheck; ++c) {
    Eigen::Matrix4d pose;
    for (int i = 0; i < 4; ++i)
      for (int j = 0; j < 4; ++j) in >> pose(i, j);
    Data::Matrix6x jexp(6, model.nv);
    for (int i = 0; i < 6; ++i)
      for (int j = 0; j < model.nv; ++j) in >> jexp(i, j);
    framesForwardKinematics(model, data, qs[c]);
    J.setZero();
    computeFrameJacobian(model, data, qs[c], fid, LOCAL_WORLD_ALIGNED, J);
    worst = std::max(worst, (data.oMf[fid].toHomogeneousMatrix() - pose).cwiseAbs().maxCoeff());
    worst = std::max(worst, (J - jexp).cwiseAbs().maxCoeff());
  }
  if (!in || ncheck == 0 || worst > 1e-12) {
    std::cerr << "rebuilt model does not match the URDF model (max error " << worst << ", " << ncheck
              << " checks)\n";
    return 1;
  }
  std::printf("model: nq %d nv %d, frame %s; rebuilt model matches URDF model (max err %.1e over %d configs)\n",
              model.nq, model.nv, frame_name.c_str(), worst, ncheck);

  const long calls = argc > 3 ? std::atol(argv[3]) : 1000000;
  const std::size_t mask = qs.size() - 1;  // qs.size() is a power of two
  double sink = 0.0;

  Timing fk = time_ns([&](long k) {
    forwardKinematics(model, data, qs[k & mask]);
    sink += data.oMi[model.njoints - 1].translation()(0);
  }, calls, runs);
  Timing ffk = time_ns([&](long k) {
    framesForwardKinematics(model, data, qs[k & mask]);
    sink += data.oMf[fid].translation()(0);
  }, calls, runs);
  Timing cfj = time_ns([&](long k) {
    computeFrameJacobian(model, data, qs[k & mask], fid, LOCAL_WORLD_ALIGNED, J);
    sink += J(0, 0);
  }, calls, runs);
  Timing full = time_ns([&](long k) {
    computeJointJacobians(model, data, qs[k & mask]);
    updateFramePlacement(model, data, fid);
    getFrameJacobian(model, data, fid, LOCAL_WORLD_ALIGNED, J);
    sink += J(0, 0);
  }, calls, runs);

  report("pinocchio forwardKinematics", fk);
  report("pinocchio framesForwardKinematics", ffk);
  report("pinocchio computeFrameJacobian (LOCAL_WORLD_ALIGNED)", cfj);
  report("pinocchio computeJointJacobians+updateFramePlacement+getFrameJ.", full);
  std::printf("(median of %d runs x %ld calls over %d configurations; checksum %g)\n", runs, calls, nconf, sink);
  return 0;
}
