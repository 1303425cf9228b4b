# Points the OSQP build (crate osqp-sys, optional feature `osqp`) at the QDLDL
# sources vendored beside this file, so that CMake needs no network access.
# QDLDL: Apache-2.0, see qdldl/LICENSE.
set(FETCHCONTENT_SOURCE_DIR_QDLDL "${CMAKE_CURRENT_LIST_DIR}/qdldl" CACHE PATH "vendored QDLDL sources" FORCE)
