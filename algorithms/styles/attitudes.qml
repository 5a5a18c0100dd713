<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>
<qgis hasScaleBasedVisibilityFlag="0" labelsEnabled="1" maxScale="0" minScale="100000000" simplifyAlgorithm="0" simplifyDrawingHints="1" simplifyDrawingTol="1" simplifyLocal="1" simplifyMaxScale="1" styleCategories="Symbology|Labeling|Rendering" symbologyReferenceScale="-1" version="3.22.16-Białowieża">
 <renderer-v2 enableorderby="0" forceraster="0" referencescale="-1" symbollevels="0" type="RuleRenderer">
  <rules key="attitudes-root">
   <rule filter="&quot;quality&quot; = 'good' AND &quot;dip_direction_deg&quot; IS NOT NULL" key="attitudes-0" label="good" symbol="0"></rule>
   <rule filter="&quot;quality&quot; = 'good' AND &quot;dip_direction_deg&quot; IS NULL" key="attitudes-1" label="good, horizontal within its 95% confidence" symbol="1"></rule>
   <rule filter="&quot;quality&quot; = 'weak' AND &quot;dip_direction_deg&quot; IS NOT NULL" key="attitudes-2" label="weak" symbol="2"></rule>
   <rule filter="&quot;quality&quot; = 'weak' AND &quot;dip_direction_deg&quot; IS NULL" key="attitudes-3" label="weak, horizontal within its 95% confidence" symbol="3"></rule>
  </rules>
  <symbols>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="0" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="27,27,27,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="line"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="27,27,27,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.5"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="4"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="27,27,27,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="line"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="27,27,27,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.5"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="4"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties" type="Map">
        <Option name="angle" type="Map">
         <Option name="active" type="bool" value="true"></Option>
         <Option name="expression" type="QString" value="&quot;dip_direction_deg&quot; + 90"></Option>
         <Option name="type" type="int" value="3"></Option>
        </Option>
       </Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="27,27,27,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="line"></Option>
      <Option name="offset" type="QString" value="0,-0.69999999999999996"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="27,27,27,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.5"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="1.4"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="27,27,27,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="line"></prop>
     <prop k="offset" v="0,-0.69999999999999996"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="27,27,27,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.5"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="1.4"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties" type="Map">
        <Option name="angle" type="Map">
         <Option name="active" type="bool" value="true"></Option>
         <Option name="field" type="QString" value="dip_direction_deg"></Option>
         <Option name="type" type="int" value="2"></Option>
        </Option>
       </Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="1" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="0,0,0,0"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="circle"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="27,27,27,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.4"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="2.2"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="0,0,0,0"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="circle"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="27,27,27,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.4"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="2.2"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="2" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="138,138,138,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="line"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="138,138,138,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.5"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="4"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="138,138,138,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="line"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="138,138,138,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.5"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="4"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties" type="Map">
        <Option name="angle" type="Map">
         <Option name="active" type="bool" value="true"></Option>
         <Option name="expression" type="QString" value="&quot;dip_direction_deg&quot; + 90"></Option>
         <Option name="type" type="int" value="3"></Option>
        </Option>
       </Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="138,138,138,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="line"></Option>
      <Option name="offset" type="QString" value="0,-0.69999999999999996"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="138,138,138,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.5"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="1.4"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="138,138,138,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="line"></prop>
     <prop k="offset" v="0,-0.69999999999999996"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="138,138,138,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.5"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="1.4"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties" type="Map">
        <Option name="angle" type="Map">
         <Option name="active" type="bool" value="true"></Option>
         <Option name="field" type="QString" value="dip_direction_deg"></Option>
         <Option name="type" type="int" value="2"></Option>
        </Option>
       </Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="3" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="0,0,0,0"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="circle"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="138,138,138,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.4"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="2.2"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="0,0,0,0"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="circle"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="138,138,138,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.4"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="2.2"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
  </symbols>
 </renderer-v2>
 <labeling type="simple">
  <settings calloutType="simple">
   <text-style allowHtml="0" blendMode="0" capitalization="0" fieldName="if(&quot;quality&quot; = 'undetermined', '', round(&quot;dip_deg&quot;))" fontFamily="DejaVu LGC Sans" fontItalic="0" fontKerning="1" fontLetterSpacing="0" fontSize="8" fontSizeMapUnitScale="3x:0,0,0,0,0,0" fontSizeUnit="Point" fontStrikeout="0" fontUnderline="0" fontWeight="50" fontWordSpacing="0" isExpression="1" legendString="Aa" multilineHeight="1" namedStyle="" previewBkgrdColor="255,255,255,255" textColor="0,0,0,255" textOpacity="1" textOrientation="horizontal" useSubstitutions="0">
    <families></families>
    <text-buffer bufferBlendMode="0" bufferColor="255,255,255,255" bufferDraw="1" bufferJoinStyle="128" bufferNoFill="1" bufferOpacity="1" bufferSize="0.59999999999999998" bufferSizeMapUnitScale="3x:0,0,0,0,0,0" bufferSizeUnits="MM"></text-buffer>
    <text-mask maskEnabled="0" maskJoinStyle="128" maskOpacity="1" maskSize="1.5" maskSizeMapUnitScale="3x:0,0,0,0,0,0" maskSizeUnits="MM" maskType="0" maskedSymbolLayers=""></text-mask>
    <background shapeBlendMode="0" shapeBorderColor="128,128,128,255" shapeBorderWidth="0" shapeBorderWidthMapUnitScale="3x:0,0,0,0,0,0" shapeBorderWidthUnit="MM" shapeDraw="0" shapeFillColor="255,255,255,255" shapeJoinStyle="64" shapeOffsetMapUnitScale="3x:0,0,0,0,0,0" shapeOffsetUnit="MM" shapeOffsetX="0" shapeOffsetY="0" shapeOpacity="1" shapeRadiiMapUnitScale="3x:0,0,0,0,0,0" shapeRadiiUnit="MM" shapeRadiiX="0" shapeRadiiY="0" shapeRotation="0" shapeRotationType="0" shapeSVGFile="" shapeSizeMapUnitScale="3x:0,0,0,0,0,0" shapeSizeType="0" shapeSizeUnit="MM" shapeSizeX="0" shapeSizeY="0" shapeType="0">
     <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="fillSymbol" type="fill">
      <data_defined_properties>
       <Option type="Map">
        <Option name="name" type="QString" value=""></Option>
        <Option name="properties"></Option>
        <Option name="type" type="QString" value="collection"></Option>
       </Option>
      </data_defined_properties>
      <layer class="SimpleFill" enabled="1" locked="0" pass="0">
       <Option type="Map">
        <Option name="border_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
        <Option name="color" type="QString" value="255,255,255,255"></Option>
        <Option name="joinstyle" type="QString" value="bevel"></Option>
        <Option name="offset" type="QString" value="0,0"></Option>
        <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
        <Option name="offset_unit" type="QString" value="MM"></Option>
        <Option name="outline_color" type="QString" value="128,128,128,255"></Option>
        <Option name="outline_style" type="QString" value="no"></Option>
        <Option name="outline_width" type="QString" value="0"></Option>
        <Option name="outline_width_unit" type="QString" value="MM"></Option>
        <Option name="style" type="QString" value="solid"></Option>
       </Option>
       <prop k="border_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
       <prop k="color" v="255,255,255,255"></prop>
       <prop k="joinstyle" v="bevel"></prop>
       <prop k="offset" v="0,0"></prop>
       <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
       <prop k="offset_unit" v="MM"></prop>
       <prop k="outline_color" v="128,128,128,255"></prop>
       <prop k="outline_style" v="no"></prop>
       <prop k="outline_width" v="0"></prop>
       <prop k="outline_width_unit" v="MM"></prop>
       <prop k="style" v="solid"></prop>
       <data_defined_properties>
        <Option type="Map">
         <Option name="name" type="QString" value=""></Option>
         <Option name="properties"></Option>
         <Option name="type" type="QString" value="collection"></Option>
        </Option>
       </data_defined_properties>
      </layer>
     </symbol>
    </background>
    <shadow shadowBlendMode="6" shadowColor="0,0,0,255" shadowDraw="0" shadowOffsetAngle="135" shadowOffsetDist="1" shadowOffsetGlobal="1" shadowOffsetMapUnitScale="3x:0,0,0,0,0,0" shadowOffsetUnit="MM" shadowOpacity="0.69999999999999996" shadowRadius="1.5" shadowRadiusAlphaOnly="0" shadowRadiusMapUnitScale="3x:0,0,0,0,0,0" shadowRadiusUnit="MM" shadowScale="100" shadowUnder="0"></shadow>
    <dd_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </dd_properties>
    <substitutions></substitutions>
   </text-style>
   <text-format addDirectionSymbol="0" autoWrapLength="0" decimals="3" formatNumbers="0" leftDirectionSymbol="&lt;" multilineAlign="3" placeDirectionSymbol="0" plussign="0" reverseDirectionSymbol="0" rightDirectionSymbol=">" useMaxLineLengthForAutoWrap="1" wrapChar=""></text-format>
   <placement centroidInside="0" centroidWhole="0" dist="0" distMapUnitScale="3x:0,0,0,0,0,0" distUnits="MM" fitInPolygonOnly="0" geometryGenerator="" geometryGeneratorEnabled="0" geometryGeneratorType="PointGeometry" labelOffsetMapUnitScale="3x:0,0,0,0,0,0" layerType="UnknownGeometry" lineAnchorClipping="0" lineAnchorPercent="0.5" lineAnchorType="0" maxCurvedCharAngleIn="25" maxCurvedCharAngleOut="-25" offsetType="0" offsetUnits="MM" overrunDistance="0" overrunDistanceMapUnitScale="3x:0,0,0,0,0,0" overrunDistanceUnit="MM" placement="1" placementFlags="10" polygonPlacementFlags="2" predefinedPositionOrder="TR,TL,BR,BL,R,L,TSR,BSR" preserveRotation="1" priority="5" quadOffset="8" repeatDistance="0" repeatDistanceMapUnitScale="3x:0,0,0,0,0,0" repeatDistanceUnits="MM" rotationAngle="0" rotationUnit="AngleDegrees" xOffset="1.2" yOffset="1.2"></placement>
   <rendering displayAll="0" drawLabels="1" fontLimitPixelSize="0" fontMaxPixelSize="10000" fontMinPixelSize="0" labelPerPart="0" limitNumLabels="0" maxNumLabels="2000" mergeLines="0" minFeatureSize="0" obstacle="1" obstacleFactor="1" obstacleType="1" scaleMax="0" scaleMin="0" scaleVisibility="0" unplacedVisibility="0" upsidedownLabels="0" zIndex="0"></rendering>
   <dd_properties>
    <Option type="Map">
     <Option name="name" type="QString" value=""></Option>
     <Option name="properties"></Option>
     <Option name="type" type="QString" value="collection"></Option>
    </Option>
   </dd_properties>
   <callout type="simple">
    <Option type="Map">
     <Option name="anchorPoint" type="QString" value="pole_of_inaccessibility"></Option>
     <Option name="blendMode" type="int" value="0"></Option>
     <Option name="ddProperties" type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
     <Option name="drawToAllParts" type="bool" value="false"></Option>
     <Option name="enabled" type="QString" value="0"></Option>
     <Option name="labelAnchorPoint" type="QString" value="point_on_exterior"></Option>
     <Option name="lineSymbol" type="QString" value="&lt;symbol alpha=&quot;1&quot; clip_to_extent=&quot;1&quot; force_rhr=&quot;0&quot; name=&quot;symbol&quot; type=&quot;line&quot;>&lt;data_defined_properties>&lt;Option type=&quot;Map&quot;>&lt;Option name=&quot;name&quot; type=&quot;QString&quot; value=&quot;&quot;>&lt;/Option>&lt;Option name=&quot;properties&quot;>&lt;/Option>&lt;Option name=&quot;type&quot; type=&quot;QString&quot; value=&quot;collection&quot;>&lt;/Option>&lt;/Option>&lt;/data_defined_properties>&lt;layer class=&quot;SimpleLine&quot; enabled=&quot;1&quot; locked=&quot;0&quot; pass=&quot;0&quot;>&lt;Option type=&quot;Map&quot;>&lt;Option name=&quot;align_dash_pattern&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;capstyle&quot; type=&quot;QString&quot; value=&quot;square&quot;>&lt;/Option>&lt;Option name=&quot;customdash&quot; type=&quot;QString&quot; value=&quot;5;2&quot;>&lt;/Option>&lt;Option name=&quot;customdash_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;Option name=&quot;customdash_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;dash_pattern_offset&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;dash_pattern_offset_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;Option name=&quot;dash_pattern_offset_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;draw_inside_polygon&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;joinstyle&quot; type=&quot;QString&quot; value=&quot;bevel&quot;>&lt;/Option>&lt;Option name=&quot;line_color&quot; type=&quot;QString&quot; value=&quot;60,60,60,255&quot;>&lt;/Option>&lt;Option name=&quot;line_style&quot; type=&quot;QString&quot; value=&quot;solid&quot;>&lt;/Option>&lt;Option name=&quot;line_width&quot; type=&quot;QString&quot; value=&quot;0.3&quot;>&lt;/Option>&lt;Option name=&quot;line_width_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;offset&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;offset_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;Option name=&quot;offset_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;ring_filter&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_end&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_end_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_end_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_start&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_start_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;Option name=&quot;trim_distance_start_unit&quot; type=&quot;QString&quot; value=&quot;MM&quot;>&lt;/Option>&lt;Option name=&quot;tweak_dash_pattern_on_corners&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;use_custom_dash&quot; type=&quot;QString&quot; value=&quot;0&quot;>&lt;/Option>&lt;Option name=&quot;width_map_unit_scale&quot; type=&quot;QString&quot; value=&quot;3x:0,0,0,0,0,0&quot;>&lt;/Option>&lt;/Option>&lt;prop k=&quot;align_dash_pattern&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;capstyle&quot; v=&quot;square&quot;>&lt;/prop>&lt;prop k=&quot;customdash&quot; v=&quot;5;2&quot;>&lt;/prop>&lt;prop k=&quot;customdash_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;prop k=&quot;customdash_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;dash_pattern_offset&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;dash_pattern_offset_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;prop k=&quot;dash_pattern_offset_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;draw_inside_polygon&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;joinstyle&quot; v=&quot;bevel&quot;>&lt;/prop>&lt;prop k=&quot;line_color&quot; v=&quot;60,60,60,255&quot;>&lt;/prop>&lt;prop k=&quot;line_style&quot; v=&quot;solid&quot;>&lt;/prop>&lt;prop k=&quot;line_width&quot; v=&quot;0.3&quot;>&lt;/prop>&lt;prop k=&quot;line_width_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;offset&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;offset_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;prop k=&quot;offset_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;ring_filter&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_end&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_end_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_end_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_start&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_start_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;prop k=&quot;trim_distance_start_unit&quot; v=&quot;MM&quot;>&lt;/prop>&lt;prop k=&quot;tweak_dash_pattern_on_corners&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;use_custom_dash&quot; v=&quot;0&quot;>&lt;/prop>&lt;prop k=&quot;width_map_unit_scale&quot; v=&quot;3x:0,0,0,0,0,0&quot;>&lt;/prop>&lt;data_defined_properties>&lt;Option type=&quot;Map&quot;>&lt;Option name=&quot;name&quot; type=&quot;QString&quot; value=&quot;&quot;>&lt;/Option>&lt;Option name=&quot;properties&quot;>&lt;/Option>&lt;Option name=&quot;type&quot; type=&quot;QString&quot; value=&quot;collection&quot;>&lt;/Option>&lt;/Option>&lt;/data_defined_properties>&lt;/layer>&lt;/symbol>"></Option>
     <Option name="minLength" type="double" value="0"></Option>
     <Option name="minLengthMapUnitScale" type="QString" value="3x:0,0,0,0,0,0"></Option>
     <Option name="minLengthUnit" type="QString" value="MM"></Option>
     <Option name="offsetFromAnchor" type="double" value="0"></Option>
     <Option name="offsetFromAnchorMapUnitScale" type="QString" value="3x:0,0,0,0,0,0"></Option>
     <Option name="offsetFromAnchorUnit" type="QString" value="MM"></Option>
     <Option name="offsetFromLabel" type="double" value="0"></Option>
     <Option name="offsetFromLabelMapUnitScale" type="QString" value="3x:0,0,0,0,0,0"></Option>
     <Option name="offsetFromLabelUnit" type="QString" value="MM"></Option>
    </Option>
   </callout>
  </settings>
 </labeling>
 <blendMode>0</blendMode>
 <featureBlendMode>0</featureBlendMode>
 <layerOpacity>1</layerOpacity>
 <layerGeometryType>0</layerGeometryType>
</qgis>
