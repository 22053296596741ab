/// @file
/// Umbrella header: every public rowfold concept.
#pragma once

#include "rowfold/batch_qr.hpp"
#include "rowfold/centering.hpp"
#include "rowfold/estimator_base.hpp"
#include "rowfold/forgetting_rls.hpp"
#include "rowfold/givens_qr.hpp"
#include "rowfold/multi_response.hpp"
#include "rowfold/normal_equations.hpp"
#include "rowfold/options.hpp"
#include "rowfold/results.hpp"
#include "rowfold/snapshot.hpp"
#include "rowfold/status.hpp"
#include "rowfold/student_t.hpp"
#include "rowfold/window.hpp"
