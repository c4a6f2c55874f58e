CDF not really netcdf
