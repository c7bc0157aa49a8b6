// Whether the tests are built with a sanitizer, which changes what memory
// measurements see (AddressSanitizer's quarantine and malloc, shadow
// memory). GCC defines __SANITIZE_ADDRESS__ and __SANITIZE_THREAD__; clang
// answers __has_feature instead.
#ifndef PARITAS_TESTS_SANITIZERS_H_
#define PARITAS_TESTS_SANITIZERS_H_

#if defined(__SANITIZE_ADDRESS__)
#define PARITAS_TEST_ADDRESS_SANITIZER 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define PARITAS_TEST_ADDRESS_SANITIZER 1
#endif
#endif

#if defined(__SANITIZE_THREAD__)
#define PARITAS_TEST_THREAD_SANITIZER 1
#elif defined(__has_feature)
#if __has_feature(thread_sanitizer)
#define PARITAS_TEST_THREAD_SANITIZER 1
#endif
#endif

#endif  // PARITAS_TESTS_SANITIZERS_H_
