# Night-sequence release method for refined toluene TR-99.8 (product code
# OKS-T998), Okkerby Solvents, Tarnmouth works. An invented scenario for the
# demo. The same chromatography as toluene-release.hcl, run as a sequence:
# benzene and ethylbenzene are quantified in mg/kg by external standard
# against a five-level calibration; purity and the unknowns stay normalized
# area %. The sequence must pass its system-suitability gates, and each
# result is the mean of three replicate injections.

pipeline "toluene-night-release" {
  revision    = 1
  description = "Refined toluene TR-99.8: benzene and ethylbenzene in mg/kg by external standard, purity by normalized area %, GC-FID sequence"
}

input {
  signal_unit = "pA"
}

smooth {
  method = "savitzky-golay"
  window = 7
  order  = 2
}

baseline {
  method    = "asls"
  lambda    = 1e8
  asymmetry = 0.001
}

detect {
  min_snr = 10
  ignore {          # unretained (air) peak
    from = 0
    to   = 1.5
  }
}

integrate {
  constants = "pharmacopoeia"
}

identify {
  component "toluene" {
    rt     = 6.40
    window = 0.08
    main   = true
  }
  component "benzene" {
    rt     = 3.62
    window = 0.05
    rrf    = 1.01
  }
  component "ethylbenzene" {
    rt     = 9.10
    window = 0.05
    rrf    = 0.98
  }
  component "p-xylene" {
    rt     = 9.48
    window = 0.05
    rrf    = 0.97
  }
  component "m-xylene" {
    rt     = 9.70
    window = 0.05
    rrf    = 0.97
  }
  component "o-xylene" {
    rt     = 10.42
    window = 0.05
    rrf    = 0.97
  }
}

quantify {
  method              = "normalized"
  unknown_rrf         = 1.00
  reporting_threshold = 0.005
}

# Benzene 20–100 mg/kg and ethylbenzene 100–500 mg/kg in five levels,
# straight lines weighted 1/x (the variance grows with the amount).
calibration {
  method               = "external"
  unit                 = "mg/kg"
  model                = "linear"
  weighting            = "1/x"
  max_deviation        = 10
  max_deviation_lowest = 15
  min_r2               = 0.995
  component "benzene" {}
  component "ethylbenzene" {}
}

suitability {
  constants    = "pharmacopoeia"
  noise_window = 5
  noise        = "blank"

  resolution {
    between = ["p-xylene", "m-xylene"]
    min     = 1.5
  }
  symmetry {
    component = "ethylbenzene"
    min       = 0.8
    max       = 1.8
  }
  plates {
    component = "ethylbenzene"
    min       = 50000
  }
  signal_to_noise {
    component = "benzene"
    min       = 10
  }
  precision {
    component = "ethylbenzene"
    max_rsd   = 2.0
  }
  blank {
    components = ["benzene", "ethylbenzene"]
    max_snr    = 3
  }
  drift {
    max = 5.0
  }
}

replicates {
  count   = 3
  max_rsd = 5.0
  result "Largest unknown" {
    max_rsd = 10.0
  }
}

limit "Purity (toluene)" {
  value = component.toluene.percent
  min   = 99.80
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Benzene" {
  value = component.benzene.amount
  max   = 100
  unit  = "mg/kg"
  when  = meta.sample_type == "sample"
}

limit "Ethylbenzene" {
  value = component.ethylbenzene.amount
  max   = 500
  unit  = "mg/kg"
  when  = meta.sample_type == "sample"
}

limit "Largest unknown" {
  value = largest_unknown
  max   = 0.030
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Total impurities" {
  value = total_impurities
  max   = 0.20
  unit  = "% (normalized area)"
  when  = meta.sample_type == "sample"
}

limit "Water (Karl Fischer)" {
  value = meta.water_kf_pct
  max   = 0.030
  unit  = "% (m/m)"
  when  = meta.sample_type == "sample"
}

report {
  formats     = ["json", "xlsx", "pdf"]
  site        = "Okkerby Solvents — Tarnmouth works, Quality Control laboratory"
  address     = ["4 Quay Road, Tarnmouth", "(an invented company for the lotgate demo)"]
  logo        = "okkerby-logo.png"
  product     = "Refined toluene"
  grade       = "TR-99.8 (product code OKS-T998)"
  paper       = "A4"
  signatures  = ["Analysed by (QC analyst)", "Reviewed by (QC supervisor)", "Released by (QA)"]
  safety_note = "Toluene: keep containers closed and away from ignition sources; the works' permit-to-work rules apply in the GC laboratory."
}
