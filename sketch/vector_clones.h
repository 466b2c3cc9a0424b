// WAYMARK_VECTOR_CLONES: put before a hot loop's function so that GCC builds AVX-512, AVX2 and
// baseline versions and picks one at load time; one binary then runs on any x86-64 and uses
// the widest vectors the machine has. Empty elsewhere (other compilers and architectures, and
// under AddressSanitizer and ThreadSanitizer, whose instrumented resolvers would run before the
// sanitizer's runtime is set up).
#pragma once

#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && !defined(__SANITIZE_ADDRESS__) && \
    !defined(__SANITIZE_THREAD__)
#define WAYMARK_VECTOR_CLONES __attribute__((target_clones("avx512f", "avx2", "default")))
#else
#define WAYMARK_VECTOR_CLONES
#endif
