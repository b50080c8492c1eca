ph,pco2,hco3,na,cl,k,albumin,lactate,glucose,urea,bun,osmolality,ica,mg,phosphate,hb,po2,fio2,pb,temperature,age,sample_type,hco3_source,pregnancy,sample_id,patient_id,collected_at
7.33,60.0,31.0,140.0,98.0,4.1,,,,,,,,,,,68.0,0.4,,,,unknown,unknown,unknown,,,
