#pragma once
// Starting a program for the benchmarks, with its standard output on a pipe.
#include <sys/wait.h>
#include <unistd.h>

#include <string>
#include <vector>

namespace bench {

struct Child {
  pid_t pid = -1;
  int out_fd = -1;  ///< read end of the child's standard output
};

/// Forks and runs argv[0] (searched on PATH) with argv; stdout goes to Child::out_fd.
inline Child spawn(const std::vector<std::string>& argv) {
  int p[2];
  if (pipe(p) != 0) return {};
  const pid_t pid = fork();
  if (pid == 0) {
    dup2(p[1], STDOUT_FILENO);
    close(p[0]);
    close(p[1]);
    std::vector<char*> args;
    for (const auto& a : argv) args.push_back(const_cast<char*>(a.c_str()));
    args.push_back(nullptr);
    execvp(args[0], args.data());
    _exit(127);
  }
  close(p[1]);
  return {pid, p[0]};
}

}  // namespace bench
